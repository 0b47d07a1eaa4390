"""`screen`: every divide of a DEM between basins above a minimum area, ranked by instability."""

from __future__ import annotations

import functools
import math
import os
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from divides._jsonable import to_jsonable
from divides.assess.contrasts import compute_contrasts
from divides.assess.divide_kind import drainage_directions, kind_of
from divides.assess.points import MIN_FACING, near_divide_fields, sample_divide
from divides.assess.hilltops import hilltop_contrast, hilltop_curvature, hilltop_window
from divides.assess.pooling import label_outlets, pool_short
from divides.assess.missing_data import raster_holes_cells
from divides.assess.segment_motion import (
    INSTABILITY_EVIDENCE,
    INSTABILITY_SCALING,
    LIKELY_MOTION,
    MAIN_ONE_U_CELLS,
    RUNS_AGREE_CELLS,
    TRANSIENT_BASIN,
    TRANSIENT_SPREADS,
    bounded_instability,
    evidence_features,
    finite_or_none,
    instability_of,
    motion_probability,
    run_shifts,
    run_size,
)
from divides.assess.verdict import CAUTION, decide
from divides.config import AssessConfig
from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.io.memory import row_blocks
from divides.model.forward_run import MAX_CELLS
from divides.model.landscape_shift import landscape_shifts, model_start
from divides.model.transience import basin_transience, transience_spread
from divides.profiles.chi import chi_weights, integrate_chi
from divides.terrain.basins import basin_labels
from divides.terrain.channels import Channels, bounded_channel_threshold, extract_channels
from divides.terrain.divide_lines import DivideLine, DivideSegment, divide_network
from divides.terrain.line_gaps import line_gaps
from divides.terrain.routing import FlowGraph, route
from divides.terrain.voids import VoidFill, fill_voids

__all__ = ["Screening", "screen", "SEGMENT_PROPERTIES", "LATERAL_REASON", "SMALL_BASINS_REASON", "motion_azimuth",
           "UNLIKELY_LATERAL_REASON", "withhold_unlikely_lateral",
           "instability_of", "evidence_features", "rank_key", "INSTABILITY_SCALING", "INSTABILITY_EVIDENCE",
           "MIN_JUDGED_CELLS", "RUNS_AGREE_CELLS", "MAIN_ONE_U_CELLS", "RUN_ORDER_BELOW", "EVIDENCE_KEYS",
           "TRANSIENT_BASIN", "TRANSIENT_SPREADS", "NEIGHBOUR_CELLS", "NEIGHBOUR_SCORE", "CHAIN_CELLS",
           "neighbour_scores", "RUN_BASIN_CELLS", "RUN_CHECKED_CELLS", "RUN_MAX_SIDE", "run_block",
           "PROMOTE_TOLD_ERROR_M", "beside_scored", "interleave_kinds", "rank_segments", "CHANNEL_AREA_SHARE",
           "CHANNEL_AREA_MIN_CELLS"]

#: The fields of AssessConfig a screening reads (only these are reported).
_USED_OPTIONS = ("theta", "n", "a0_m2", "channel_area_m2", "reference_area_m2", "dem_error_m", "dem_error_length_m",
                 "relief_radius_m", "divide_spacing_m", "block_m", "n_bootstrap", "sea_level_m", "conditioning",
                 "voids", "closed_edges", "seed", "min_confidence", "forward_run")

#: Shorter traced pieces of divide (in cells) are gaps: too short to sample both sides.
MIN_SEGMENT_CELLS = 4

#: Without ``channel_area_m2`` a screening reads the channel area from the DEM's slope–area data, raised to
#: :data:`CHANNEL_AREA_MIN_CELLS` and then capped at this share of its valid area
#: (:func:`~divides.terrain.channels.bounded_channel_threshold`), so that its minimum basin area (5 × the channel area)
#: is at most 1 % of the DEM. Round 64 (358 training cases of the regional benchmark, rule written beforehand): 787
#: targets met against 726 unbounded, which refused 10 cases; 786 with the cap alone, 784 with a cap of 0.5 %
#: (docs/validation.md).
CHANNEL_AREA_SHARE = 0.002

#: The floor of the screening's default channel area, in cells (the slope–area fallback's own floor; round 64).
CHANNEL_AREA_MIN_CELLS = 50

#: Segments shorter than this (in cells) are judged on samples pooled with the segments that
#: continue them (:mod:`divides.assess.pooling`); chosen on the training cases of the regional benchmark
#: (docs/validation.md, *Regional screening*): 60 on 12 cases early on, 120 in rounds 58 and 59 (1110 targets against
#: 1096 on 316 training cases under 0, 1 and 5 m of DEM error, none fewer under any condition).
MIN_JUDGED_CELLS = 120


#: With the landscape evidence, segments scored below this rank after every other judged segment, main segments
#: beside a strongly scored one first (:data:`NEIGHBOUR_CELLS`, round 34), each group ordered by the larger shift of
#: the two landscape runs, either way (:func:`rank_key`). Below it the score no longer tells
#: moving divides from still ones: it is set by logit p and h many logits under any meaningful value. The tier was
#: chosen against 0.5 on 57 training cases (round 14); segments the decision abstained on join it when the runs
#: move their divide (round 18, 105 cases: order target 18/27 against 14/27); segments no run measured come first
#: (round 20, 129 cases: 24/34 against 20/34); the key, the larger |shift| of both runs in either direction, replaced
#: the one-uplift-rate run's shift toward the favoured side in round 33 (177 cases: 207, 200 and 187 targets
#: against 203, 198 and 184 under 0, 1 and 5 m of DEM error). Rules written beforehand (docs/validation.md,
#: *Regional screening*).
RUN_ORDER_BELOW = 0.01

#: Where the screening is told a DEM error of at least this many metres, segments whose probability of motion
#: (:func:`divides.assess.segment_motion.motion_probability`) is 0.5 or more join the first tier of :func:`rank_key`
#: whatever their score: under noise the score's gate (both runs agreeing) misses more moving segments, and the
#: probability weighs the same evidence smoothly. Round 48 (366 training cases, rule written beforehand after round
#: 45's figures, disclosed): under 5 m of DEM error 431 targets against 421 (top 167 against 156, order 79 against 80);
#: without error and with 1 m the promotion lost order targets (86 and 80 against 92 and 88), so it waits for a told
#: error midway between the training cases' 1 and 5 m (measured afterwards under 3 m, told 3 m, on 391 training cases:
#: 5 top targets more, 6 order targets fewer, about break-even). Segments that neither landscape run measured are
#: promoted so at any told error (round 50): the score reads an unmeasured run as one that did not move the divide, the
#: probability of motion has a term of its own for it (378 training cases: 1351 targets against 1350, none fewer under
#: any condition; on a range screened by DEM edges, a directed segment at 0.999 no longer ranks below a stable one).
#: Where the screening is told this much error, a first-tier segment without a direction joins the second tier (round
#: 54, 224 training cases, rule written beforehand: under 5 m of DEM error 256 targets against 254, order 40 of 62
#: against 38, top and alarms unchanged).
PROMOTE_TOLD_ERROR_M = 3.0

#: In the tier below :data:`RUN_ORDER_BELOW`, a main segment whose line comes within this many cells of another main
#: segment's scored at least :data:`NEIGHBOUR_SCORE` ranks first (:func:`rank_key`): a divide moves along a stretch
#: several segments long, so a weakly scored piece beside a strongly scored one is more likely moving than one whose
#: neighbours score low too. Chosen against 2 and 10 cells and a neighbour scored >= 0.5 in round 34 (177 training
#: cases, rule written beforehand; docs/validation.md, *Regional screening*): 212, 204 and 189 targets under 0, 1 and
#: 5 m of DEM error against 207, 200 and 187 without the term (order 42, 38 and 31 of 48 against 37, 34 and 29).
NEIGHBOUR_CELLS = 5.0

#: ... scored at least this (the tier's own bound: a neighbour the score already ranks above the tier).
NEIGHBOUR_SCORE = RUN_ORDER_BELOW

#: Model cells of the smallest basin screened (``min_basin_area_m2``) the landscape runs keep where they can
#: (:func:`run_block`): every regional benchmark case was checked at this resolution (5 x 50 cells at block 1).
#: Round 41 (rule written beforehand): a wider DEM's runs are no longer block-averaged to 300 cells a side
#: regardless of its basins.
RUN_CHECKED_CELLS = 250.0

#: ... but the model grid stays within this many cells a side (16 times the model cells of a 300-cell side, a cost
#: bound set beforehand in round 40).
RUN_MAX_SIDE = 1200

#: The landscape runs' grid can be coarse for small basins on a wide DEM (:data:`RUN_MAX_SIDE`). Below this many
#: model cells in the smallest basin screened (``min_basin_area_m2``) the screening says its landscape evidence is
#: coarse (``forward_run_grid``). Round 40 (99 training cases, the runs' grid capped at 150-50 cells a side as on a
#: DEM 2-6 times wider): with 62 model cells or more the targets held (120 of 121), with 28, 16 and 10 they fell
#: (153 of 166, 63 of 70, 81 of 102); 50 lies in the untried gap, chosen after those figures.
RUN_BASIN_CELLS = 50.0

#: ... or reaching it through a chain of main segments below the tier that either landscape run moves at least this
#: many model cells (:func:`neighbour_scores`): a stretch that moves as a whole carries the score of its strongly
#: scored pieces to the weak ones the runs move. Chosen against 0.5 cell in round 36 (177 training cases, rule written
#: beforehand): 214, 206 and 194 targets under 0, 1 and 5 m of DEM error against 213, 206 and 194 and round 34's 212,
#: 204 and 189 (order 44, 40 and 36 of 48 against 42, 38 and 31).
CHAIN_CELLS = 1.0

#: Each segment's evidence beyond its near-divide contrasts (:func:`_landscape_evidence` and
#: :func:`rank_segments`; None when not measured).
EVIDENCE_KEYS = ("forward_shift_cells", "forward_shift_basin_cells", "hilltop_contrast", "transience_a",
                 "transience_b", "transience_sd_a", "transience_sd_b", "neighbour_instability")

#: Why divides between tributaries of the same trunk are not judged.
LATERAL_REASON = ("lateral divide between tributaries of the same trunk: not assessed (the decision model "
                  "is calibrated on divides between basins that drain apart)")

#: Why a lateral segment whose decision names a side is given no direction (:func:`withhold_unlikely_lateral`).
UNLIKELY_LATERAL_REASON = (f"lateral divide unlikely to move (probability of motion under {LIKELY_MOTION:g}): no "
                           "direction given")

#: The reason of a gap beside land in basins below the minimum area (basin 0 in the gaps layer).
SMALL_BASINS_REASON = ("beside basins smaller than the minimum basin area: not screened (a smaller minimum "
                       "basin area screens them)")

#: Properties of each segment in segments.geojson / segments.csv (stable names).
SEGMENT_PROPERTIES = ("rank", "instability", "ranking_score", "motion_probability", "confidence", "length_m", "basins",
                      "moves_toward_basin", "motion_azimuth_deg", "verdict", "basis", "n_points", "facing_share",
                      "mean_chi_a", "mean_chi_b", "divide_kind", "filled_share", *EVIDENCE_KEYS)


@dataclass(eq=False)
class Screening:
    """Every divide segment of a DEM with its verdict, ranked (1 = least stable).

    Attributes
    ----------
    dem, flow, channels : the inputs and routing.
    labels : ndarray of int32
        Basin label of every cell (0 = below the minimum area).
    segments : list of dict
        One per judged segment, ranked; keys of :data:`SEGMENT_PROPERTIES` plus ``line``
        (a :class:`DivideLine`), ``judged_lines`` (the stretch it was judged on, its own line
        first), ``judged_pairs`` (the pairs of basins of those lines, oriented as the segment's),
        ``contrasts``, ``reason`` and ``probabilities``.
    parameters : dict
    gaps : list of dict
        Every stretch of divide between two basins that was not judged: ``basins``,
        ``length_m``, ``reason``, ``line``.
    coverage : dict
        ``share`` of the length of the divides between outlet basins in judged segments,
        with the lengths behind it (see :func:`_coverage`).
    n_basins : int
        Number of basins labelled (at ``level="edges"`` the labels are the edges' own, not 1..n).
    voids : VoidFill
        The holes of nodata inside the DEM's data and whether they were filled
        (:func:`divides.terrain.voids.fill_voids`; ``dem`` is the filled DEM).
    """

    dem: Dem
    flow: FlowGraph
    channels: Channels
    labels: np.ndarray
    segments: list
    parameters: dict = field(default_factory=dict)
    gaps: list = field(default_factory=list)
    coverage: dict = field(default_factory=dict)
    n_basins: int = 0
    voids: VoidFill = VoidFill()

    def to_dict(self) -> dict:
        """JSON-ready summary (without the lines)."""
        return to_jsonable({
            "schema": "divides.screening/1",
            "dem": {"path": self.dem.path, "crs": None if self.dem.crs is None else self.dem.crs.to_string(),
                    "shape": list(self.dem.shape), "cell_size_m": list(self.dem.cell_size_m),
                    "interior_nodata_cells": self.voids.cells, "voids": self.voids.to_dict()},
            "parameters": self.parameters,
            "n_basins": self.n_basins,
            "coverage": self.coverage,
            "gaps": [{k: g[k] for k in ("basins", "length_m", "reason")} for g in self.gaps],
            "segments": [{k: s[k] for k in SEGMENT_PROPERTIES}
                         | {k: s[k] for k in ("reason", "probabilities", "contrasts", "judged_length_m")}
                         for s in self.segments],
            "caution": CAUTION,
        })

    def write(self, out_dir, *, overwrite: bool = False):
        """Write segments.geojson, segments.csv, screening.json and report.html (atomically)."""
        import divides  # the public package: writing is the report room's (divides.write), never imported here

        return divides.write(self, out_dir, overwrite=overwrite)


def _split(line: DivideLine, max_m: float) -> list[DivideLine]:
    """Cut a line into pieces of at most about ``max_m`` that share their end vertices.

    The cuts fall on vertices, so the pieces' lengths add up to the line's
    (nothing of the divide is lost between two pieces).
    """
    if line.length_m <= max_m:
        return [line]
    k = int(math.ceil(line.length_m / max_m))
    cuts = np.searchsorted(line.distance_m, np.linspace(0.0, line.length_m, k + 1)[1:-1])
    cuts = np.unique(np.r_[0, np.clip(cuts, 1, line.x.size - 2), line.x.size - 1])
    out = []
    for lo, hi in zip(cuts[:-1], cuts[1:]):
        idx = np.arange(lo, hi + 1)
        out.append(DivideLine(line.row[idx], line.col[idx], line.x[idx], line.y[idx],
                              line.distance_m[idx] - line.distance_m[lo], line.elevation_m[idx]))
    return out


def motion_azimuth(line: DivideLine, dem: Dem, toward: str,
                   stretch: Sequence[DivideLine] | None = None) -> float | None:
    """Compass bearing (0 = north, 90 = east) of the divide's normal toward the victim side.

    The normal is that of the stretch of divide the segment was judged on (``stretch``: its
    own line and those it was pooled with, :func:`divides.assess.pooling.pool_short`; default
    the line alone): perpendicular to the principal axis of the stretch's vertices (metres),
    oriented as the segment runs, side a on its left, so its right-hand normal points into b.
    A short piece of a crooked divide can lie at any angle to the divide it belongs to; on the
    regional benchmark's training cases this axis put the normal of every main-divide segment
    in a moving stretch within 45° of the measured motion (median error 10°), the chord of
    the piece alone 14 % of them beyond (median 28°; docs/validation.md).

    Parameters
    ----------
    line : DivideLine
    dem : Dem
        For the cell sizes (east and north metres per column and row).
    toward : {"a", "b"}
        The victim side; anything else gives None.
    stretch : sequence of DivideLine, optional
        The lines of the stretch judged (orientation of each is irrelevant).
    """
    if toward not in ("a", "b") or line.x.size < 2:
        return None
    lines = list(stretch) if stretch else [line]
    mid = int(np.clip(round(float(np.median(line.row))), 0, dem.shape[0] - 1))
    dx, dy = float(dem.dx[mid]), float(dem.dy[mid])
    own = np.array([(line.col[-1] - line.col[0]) * dx, -(line.row[-1] - line.row[0]) * dy])  # rows grow south
    east = np.concatenate([np.asarray(ln.col, dtype=np.float64) for ln in lines]) * dx
    north = -np.concatenate([np.asarray(ln.row, dtype=np.float64) for ln in lines]) * dy
    spread = np.cov(np.vstack([east, north]))
    if not np.any(own) or not np.any(spread):
        return None
    axis = np.linalg.eigh(spread)[1][:, -1]  # the principal axis: eigenvector of the largest eigenvalue
    if float(axis @ own) < 0:
        axis = -axis
    sign = 1.0 if toward == "b" else -1.0
    # right-hand normal of (east, north) is (north, -east)
    return float(math.degrees(math.atan2(sign * axis[1], -sign * axis[0])) % 360.0)


def _labelled_count(labels: np.ndarray) -> int:
    """How many distinct labels above 0 a label grid holds (no sort and no copy of the grid).

    Examples
    --------
    >>> _labelled_count(np.array([[0, 4, 4], [2, 0, 4]]))
    2
    """
    top = int(labels.max()) if labels.size else 0
    seen = np.zeros(top + 1, dtype=bool)
    for rows in row_blocks(labels.shape):
        seen |= np.bincount(labels[rows].ravel(), minlength=top + 1) > 0
    return int(np.count_nonzero(seen[1:]))


def _labelled_area_share(dem: Dem, labels: np.ndarray, sea_level: float | None = None) -> float:
    """Share of the DEM's valid area (above ``sea_level`` when given: the sea is no basin) in labelled basins (those
    screened), a block of rows at a time."""
    inside = total = 0.0
    for rows in row_blocks(dem.shape):
        land = dem.valid[rows]
        if sea_level is not None:
            with np.errstate(invalid="ignore"):
                land = land & (dem.elevation[rows] > sea_level)
        inside += float(np.dot(dem.cell_area[rows], np.count_nonzero(labels[rows] > 0, axis=1)))
        total += float(np.dot(dem.cell_area[rows], np.count_nonzero(land, axis=1)))
    return inside / total if total > 0 else 0.0


#: Below this share of the DEM's land in the basins screened, the screening also measures the share basins of
#: :data:`SMALLER_AREA_MULTIPLES` × the channel area would drain (``coverage["smaller_basin_shares"]``), so that its
#: caution can name a minimum basin area that reads the land (:func:`divides.report.screening.small_basins_note`).
#: Advice only: round 73 kept the default minimum basin area (docs/validation.md).
SCREENED_SHARE_CAUTION = 0.5

#: Multiples of the channel area whose basins' share of the land a screening that leaves most of it unread reports,
#: those under its minimum basin area (5 × is the default minimum basin area).
SMALLER_AREA_MULTIPLES = (5.0, 2.0, 1.0)


def _smaller_basin_shares(dem: Dem, flow: FlowGraph, threshold: float, min_area: float, level: str,
                          sea_level: float | None) -> list[dict]:
    """The land share (:func:`_labelled_area_share`) the basins of each of :data:`SMALLER_AREA_MULTIPLES` ×
    ``threshold`` smaller than ``min_area`` would drain."""
    areas = [k * threshold for k in SMALLER_AREA_MULTIPLES if k * threshold < min_area]
    return [{"min_basin_area_m2": a, "screened_area_share":
             _labelled_area_share(dem, basin_labels(flow, min_area_m2=a, level=level), sea_level)} for a in areas]


def _check_two_basins(flow: FlowGraph, labels: np.ndarray, min_area: float, level: str) -> int:
    """The number of basins labelled; raise before the long work when fewer than two reach ``min_area``: there is no
    divide to screen.

    Raises
    ------
    ParameterError
        With the two largest candidates' areas (edge regions, or outlet basins), so the user sees what to change.
    """
    found = _labelled_count(labels)
    if found >= 2:
        return found
    if level == "edges":  # the regions of every open edge, however small
        every = basin_labels(flow, min_area_m2=np.finfo(float).tiny, level="edges").ravel()
        sizes = np.bincount(every, weights=np.repeat(flow.dem.cell_area, flow.shape[1]), minlength=5)[1:]
    else:
        sizes = flow.area.ravel()[flow.outlets]
    two = np.sort(np.concatenate([sizes, np.zeros(2)]))[::-1][:2] / 1e6
    what = "edge regions" if level == "edges" else "outlet basins"
    edges = ", or close fewer DEM edges" if flow.conditioned.closed_edges else ""
    raise ParameterError(f"no divide to screen: {found} basin(s) drain at least the minimum basin area of "
                         f"{min_area / 1e6:.3g} km² (the two largest {what} drain {two[0]:.3g} and {two[1]:.3g} "
                         f"km²); give a smaller minimum basin area{edges}")


def _outlet_basins(flow: FlowGraph, labels: np.ndarray, min_area: float, level: str) -> np.ndarray:
    """The outlet basin of every label (index = label; 0 for 0).

    At ``level="tributaries"`` several labels share an outlet basin (tributaries of the
    same trunk); at the other levels every label is its own.
    """
    top = int(labels.max())
    if level != "tributaries":
        return np.arange(top + 1)
    outlets = basin_labels(flow, min_area_m2=min_area, level="outlets").ravel()
    out = np.zeros(top + 1, dtype=np.int64)
    out[labels.ravel()] = outlets  # every cell of a label drains to the same outlet
    out[0] = 0
    return out


def _coverage(segments: list[dict], gaps: list[dict], outlet_of: np.ndarray) -> dict:
    """Share of the length of the divides between outlet basins that lies in judged segments."""
    def between_outlets(basins):  # 0: the land in basins below the minimum area
        return 0 not in basins and outlet_of[basins[0]] != outlet_of[basins[1]]

    judged = sum(s["length_m"] for s in segments if between_outlets(s["basins"]))
    left = sum(g["length_m"] for g in gaps if between_outlets(g["basins"]))
    total_all = sum(s["length_m"] for s in segments) + sum(g["length_m"] for g in gaps)
    reasons: dict[str, float] = {}
    for g in gaps:
        reasons[g["reason"]] = reasons.get(g["reason"], 0.0) + g["length_m"]
    return {"outlet_divides_length_m": judged + left, "assessed_length_m": judged,
            "share": judged / (judged + left) if judged + left > 0 else None,
            "all_divides_length_m": total_all, "gap_length_by_reason_m": reasons}


class _Shared:
    """Read-only state of one screening, shared by its Dask tasks.

    On threads it is one object; on a cluster it is scattered once to every worker.
    """

    def __init__(self, data: dict) -> None:
        self.data = data


class _ChiOnChannels:
    """χ of one basin pair looked up by DEM cell (NaN off its channels), without a grid.

    Stands in for the χ grid :func:`divides.assess.points.sample_divide` reads at
    channel cells (``chi_grid.ravel()[cells]``): a sorted copy of the pair's
    channel cells and their χ, a few bytes per channel cell instead of a float64
    grid per task.
    """

    def __init__(self, cells: np.ndarray, chi: np.ndarray) -> None:
        order = np.argsort(cells, kind="stable")
        self._cells = np.asarray(cells)[order]
        self._chi = np.asarray(chi, dtype=np.float64)[order]

    def ravel(self) -> _ChiOnChannels:
        return self

    def __getitem__(self, cells) -> np.ndarray:
        cells = np.asarray(cells)
        out = np.full(cells.shape, np.nan)
        if self._cells.size:
            at = np.minimum(np.searchsorted(self._cells, cells), self._cells.size - 1)
            hit = self._cells[at] == cells
            out[hit] = self._chi[at[hit]]
        return out


def _pair_chi(channels: Channels, on_a: np.ndarray, on_b: np.ndarray, *, theta: float, a0: float,
              area: np.ndarray, weight: np.ndarray | float):
    """χ of both sides' channels from their common base level (sub-network only)."""
    z = channels.elevation
    low_a, low_b = z[on_a].min(), z[on_b].min()
    base = max(low_a, low_b)
    kept_a, kept_b = on_a & (z >= base), on_b & (z >= base)
    pos = np.flatnonzero(kept_a | kept_b)
    down = channels.down[pos]
    local = np.searchsorted(pos, np.maximum(down, 0))
    inside = (down >= 0) & (local < pos.size)
    inside[inside] &= pos[local[inside]] == down[inside]
    sub_down = np.where(inside, local, -1)
    w = weight if np.isscalar(weight) else weight[pos]
    chi = integrate_chi(sub_down, channels.step[pos], area[pos], theta=theta, a0=a0, weight=w)
    return pos, chi, base, kept_a, kept_b


def _assess_pairs(tasks: list[tuple], shared: _Shared) -> list[list[dict]]:
    """One Dask task: several basin pairs."""
    return [_assess_pair(t, shared.data) for t in tasks]


def _assess_pair(task: tuple, st: dict) -> list[dict]:
    """Contrasts and verdict for every segment of one basin pair."""
    label_a, label_b, segs = task
    channels: Channels = st["channels"]
    labels_ch = st["labels_ch"]
    config: AssessConfig = st["config"]
    on_a, on_b = labels_ch == label_a, labels_ch == label_b
    out = []
    if not on_a.any() or not on_b.any():
        for seg in segs:
            out.append(_empty(seg, "no channels on one side"))
        return out
    pos, chi, base, kept_a, kept_b = _pair_chi(channels, on_a, on_b, theta=st["theta"], a0=config.a0_m2,
                                               area=st["chi_area"], weight=st["chi_weight"])
    chi_grid = _ChiOnChannels(channels.cells[pos], chi)
    for seg in segs:
        try:
            pts = sample_divide(st["flow"], seg.as_divide(), spacing_m=st["spacing"],
                                channel_area_m2=channels.threshold.value_m2,
                                reference_area_m2=st["reference"], chi_grid=chi_grid,
                                relief_radius_m=config.relief_radius_m, fields=st["fields"])
        except ValueError:
            out.append(_empty(seg, "segment too short to sample"))
            continue
        mirrored = bool(np.isclose(st["reference"], channels.threshold.value_m2))
        contrasts = compute_contrasts(pts, block_points=st["block"], n_boot=st["n_boot"], base_level_m=base,
                                      seed=config.seed, dem_error=st["dem_error"], cell_m=st["cell"],
                                      mirrored=mirrored)
        # no robustness re-runs per segment; the probability is calibrated on main divides only
        verdict = decide(contrasts, same_channel=mirrored, min_confidence=config.min_confidence)
        out.append(_row(seg, pts, contrasts, verdict) | {"pts": pts, "base": base, "mirrored": mirrored})
    return out


def _empty(seg: DivideSegment, why: str) -> dict:
    """A segment that could not be judged: it goes to the gaps layer with ``why``."""
    return {"seg": seg, "gap": why}


def rank_key(instability: float | None, evidence: dict | None = None, *, promote: bool = False) -> tuple:
    """Sort key of a segment in the screening's ranking (ascending: rank 1 first; each kind of divide keeps this order
    when :func:`interleave_kinds` merges the kinds).

    Without the landscape ``evidence`` (as :func:`instability_of`) segments rank by instability, unknown
    (None: the decision abstained) last. With it (the segment's row, its ``verdict`` included), in three tiers:

    1. instability at least :data:`RUN_ORDER_BELOW`, or a ``motion_probability`` of 0.5 or more where ``promote``
       (as where the screening is told a DEM error of :data:`PROMOTE_TOLD_ERROR_M` or more; round 48) or where neither
       landscape run measured the segment (round 50): first the segments the decision gives a direction (``verdict``
       "a" or "b", hence a motion azimuth), then those without one, each by instability (round 39); where
       ``promote``, those without one join the second tier instead (round 54);
    2. below it, first the segments whose ``neighbour_instability`` (:func:`rank_segments`) is at least
       :data:`NEIGHBOUR_SCORE`; within each group by the larger |shift| of the two landscape runs (one uplift
       rate; one per outlet basin), either direction, larger first (neither run measured first: no run evidence
       is not evidence of stillness; a shift under :data:`RUNS_AGREE_CELLS` reads as 0, round 63), then by
       instability; an unknown segment joins this tier when the
       one-uplift-rate run moves its divide at least :data:`RUNS_AGREE_CELLS` and the per-basin run does not move
       it as far the other way;
    3. other unknown segments.

    Examples
    --------
    >>> pulled = {"forward_shift_cells": 1.5, "forward_shift_basin_cells": 0.1}  # 1.5 cells into b, one rate
    >>> pushed = {"forward_shift_cells": -0.2, "forward_shift_basin_cells": -1.0}  # 1 cell into a, per basin
    >>> still = {"forward_shift_cells": 0.1, "forward_shift_basin_cells": 0.0}
    >>> rank_key(1e-6, pulled) < rank_key(1e-6, pushed) < rank_key(1e-3, still) < rank_key(None)
    True
    >>> nudged = {"forward_shift_cells": 0.0, "forward_shift_basin_cells": 0.4}  # under half a cell: a tie
    >>> rank_key(1e-3, still) < rank_key(1e-6, nudged) < rank_key(1e-9, still)
    True
    >>> rank_key(0.3, still) < rank_key(1e-3, {}) < rank_key(1e-3, pushed)
    True
    >>> moved = {"forward_shift_cells": -1.0, "forward_shift_basin_cells": -0.4}  # 1 and 0.4 cell into a
    >>> rank_key(1e-3, pulled) < rank_key(None, moved) < rank_key(1e-3, still) < rank_key(None, still)
    True
    >>> beside = {**still, "neighbour_instability": 0.9}  # next to a segment scored 0.9
    >>> rank_key(0.3, still) < rank_key(1e-6, beside) < rank_key(1e-3, {}) < rank_key(1e-3, pulled)
    True
    >>> points = {**still, "verdict": "b"}
    >>> rank_key(0.1, points) < rank_key(0.4, {**still, "verdict": "undetermined"}) < rank_key(1e-3, pulled)
    True
    >>> likely = {**points, "motion_probability": 0.7}  # scored 1e-6, but probably moving
    >>> rank_key(1e-6, likely, promote=True) < rank_key(0.4, {**still, "verdict": "undetermined"})
    True
    >>> rank_key(1e-6, likely) > rank_key(0.4, {**still, "verdict": "undetermined"})  # told under 3 m
    True
    >>> aimless = {**still, "verdict": "undetermined"}  # scored 0.4, no direction
    >>> rank_key(1e-6, beside, promote=True) < rank_key(0.4, aimless, promote=True) < rank_key(1e-3, still)
    True
    >>> unmeasured = {"verdict": "b", "motion_probability": 0.99}  # neither run measured it
    >>> rank_key(1e-6, unmeasured) < rank_key(0.4, {**still, "verdict": "undetermined"})  # at any told error
    True
    """
    likely = (evidence is not None and (promote or run_size(evidence) is None)
              and (finite_or_none(evidence.get("motion_probability")) or 0.0) >= 0.5)
    # a top-tier segment without a direction has no motion azimuth to act on (round 39); under a DEM told to be
    # noisy its score alone does not hold it in the top tier (round 54)
    aimless = evidence is not None and evidence.get("verdict") not in ("a", "b")
    if (instability is not None and (evidence is None or instability >= RUN_ORDER_BELOW or likely)
            and not (aimless and promote)):
        return (0, float(aimless), -instability, 0.0)
    if evidence is None or (instability is None and _run_moves(evidence) is None):
        return (2, 0.0, 0.0, 0.0)
    size = run_size(evidence)
    # a shift under half a cell is within what resampling the same landscape half a cell moves it (round 63): a tie
    size = math.inf if size is None else (0.0 if size < RUNS_AGREE_CELLS else size)
    return (1, -float(beside_scored(evidence)), -size, 0.0 if instability is None else -instability)


def interleave_kinds(kinds: Sequence[str], probabilities: Sequence[float | None]) -> list[int]:
    """The order of segments already ranked (by :func:`rank_key`) in which each kind of divide keeps its own order and
    the kinds are interleaved by each segment's *reach*: the largest probability of motion from it to the end of its
    kind's list (unknown read as 0), larger first, ties in the present order (round 62, docs/validation.md).

    :func:`rank_key`'s tiers were chosen on the main segments' targets; their score is a different function for each
    kind (:data:`INSTABILITY_EVIDENCE`), so a main segment likely to move whose score the per-basin run gated to 0
    ranked below lateral segments unlikely to move. Each kind's own order, and so the main targets, is unchanged.

    Parameters
    ----------
    kinds : sequence of str
        Each segment's ``divide_kind``, in the present order.
    probabilities : sequence of float or None
        Each segment's probability of motion (:func:`~divides.assess.segment_motion.motion_probability`).

    Returns
    -------
    list of int
        Indices into the present order.

    Examples
    --------
    >>> interleave_kinds(["main", "lateral", "lateral", "main", "main"], [0.9, 0.3, 0.2, 0.01, 0.95])
    [0, 3, 4, 1, 2]
    """
    reach = [0.0] * len(kinds)
    for kind in set(kinds):
        best = 0.0
        for i in reversed([i for i, k in enumerate(kinds) if k == kind]):
            best = max(best, probabilities[i] or 0.0)
            reach[i] = best
    return sorted(range(len(kinds)), key=lambda i: (-reach[i], i))


def beside_scored(evidence: dict) -> bool:
    """Whether a main segment scored at least :data:`NEIGHBOUR_SCORE` lies beside this one or reaches it through a
    chain (its ``neighbour_instability``, :func:`neighbour_scores`); what :func:`rank_key`'s second tier and the
    probability of motion (:func:`divides.assess.segment_motion.motion_features`) read."""
    beside = finite_or_none(evidence.get("neighbour_instability"))
    return beside is not None and beside >= NEIGHBOUR_SCORE


def _main_neighbours(rows: list[dict]) -> list[list[int]]:
    """For each main segment of ``rows`` (in their order), the indices among them of the others whose lines come
    within :data:`NEIGHBOUR_CELLS` (:func:`divides.terrain.line_gaps.line_gaps`)."""
    main = [r for r in rows if r["divide_kind"] == "main"]
    near: list[list[int]] = [[] for _ in main]
    for p, q in zip(*(a.tolist() for a in line_gaps([r["seg"].line for r in main], NEIGHBOUR_CELLS)[:2])):
        near[p].append(q)
        near[q].append(p)
    return near


def _set_neighbour_scores(rows: list[dict], near: Sequence[Sequence[int]]) -> None:
    """Set each main segment's ``neighbour_instability`` (:func:`neighbour_scores` of the rows' ``instability``,
    ``near`` as :func:`_main_neighbours` gives it); None on other kinds, whose own truth (the area two basins exchange)
    was not read for this term."""
    main = [r for r in rows if r["divide_kind"] == "main"]
    for r in rows:
        r["neighbour_instability"] = None
    for r, value in zip(main, neighbour_scores(near, [r["instability"] for r in main], [run_size(r) for r in main])):
        r["neighbour_instability"] = value


def rank_segments(rows: list[dict], lengths: Sequence[float], near: Sequence[Sequence[int]] | None, *,
                  dem_error_m: float) -> list[dict]:
    """Score, probability of motion and order of judged segments: what :func:`screen` does once each segment is
    judged and, with the landscape evidence, measured by the runs (also replayed from the regional benchmark's
    records by ``tests/benchmarks/rescore_main_gate.py``).

    Parameters
    ----------
    rows : list of dict
        Each segment's ``probabilities`` (None: insufficient data), ``divide_kind`` and ``verdict``, and with the
        landscape evidence the fields of :data:`EVIDENCE_KEYS` but ``neighbour_instability``. Each gets
        ``instability`` (the ranking score, :func:`instability_of`), with the evidence ``neighbour_instability`` (main
        segments: :func:`neighbour_scores`; None on other kinds, whose own truth was not read for this term), and
        ``motion_probability``; a lateral segment unlikely to move loses its direction
        (:func:`withhold_unlikely_lateral`).
    lengths : sequence of float
        Each segment's length (m): longer first among equals.
    near : sequence of sequences of int, or None
        For each main segment (the rows of ``divide_kind`` "main", in their order), the indices among them of those
        within :data:`NEIGHBOUR_CELLS`; None without the landscape evidence.
    dem_error_m : float
        The DEM error the screening is told (the probability of motion reads it; :data:`PROMOTE_TOLD_ERROR_M`).

    Returns
    -------
    list of dict
        ``rows`` in rank order (:func:`rank_key`; with the evidence and told less than :data:`PROMOTE_TOLD_ERROR_M`,
        the kinds interleaved by :func:`interleave_kinds`).
    """
    evidence = near is not None
    for r in rows:
        r["instability"] = instability_of(r["probabilities"], r["divide_kind"], r if evidence else None)
    if evidence:
        _set_neighbour_scores(rows, near)
    for r in rows:  # calibrated on the benchmark's training cases (round 42); the instability ranks
        r["motion_probability"] = motion_probability(r["probabilities"], r["divide_kind"], r if evidence else None,
                                                     beside=beside_scored(r), dem_error_m=dem_error_m)
        withhold_unlikely_lateral(r)  # before the ranking, which puts the segments given a direction first
    # ranked by the score (below RUN_ORDER_BELOW by neighbours, then the runs' shifts); abstentions last
    promote = dem_error_m >= PROMOTE_TOLD_ERROR_M
    order = sorted(range(len(rows)), key=lambda i: (
        *rank_key(rows[i]["instability"], rows[i] if evidence else None, promote=promote), -lengths[i]))
    rows = [rows[i] for i in order]
    if evidence and not promote:  # told that much error, the promotion interleaves the likely movers
        rows = [rows[i] for i in interleave_kinds([r["divide_kind"] for r in rows],
                                                  [r["motion_probability"] for r in rows])]
    return rows


def withhold_unlikely_lateral(row: dict) -> None:
    """Read a lateral segment as undetermined where its decision names a side but its probability of motion is under
    :data:`LIKELY_MOTION` (round 80, docs/validation.md, *Regional screening*).

    Between two valleys that drain the same way the near-divide decision, fitted on divides between basins that
    drain apart, named a side on about one lateral segment in ten of steady model landscapes; most of those were
    measured still and had a probability of motion, calibrated on lateral divides, under one half. The segment keeps
    its probabilities, confidence (the largest of the decision's probabilities, as where the decision abstains),
    score and probability of motion; only its verdict, basis and reason change.

    Parameters
    ----------
    row : dict
        A judged segment's row with ``divide_kind``, ``verdict``, ``moves_toward``, ``basis``, ``reason`` and
        ``motion_probability``; changed in place.

    Examples
    --------
    >>> row = {"divide_kind": "lateral", "verdict": "b", "moves_toward": "b", "basis": "near-divide",
    ...        "reason": "near-divide evidence", "motion_probability": 0.2}
    >>> withhold_unlikely_lateral(row); row["verdict"], row["moves_toward"], row["basis"]
    ('undetermined', 'undetermined', 'undetermined')
    >>> main = {**row, "divide_kind": "main", "verdict": "b", "moves_toward": "b"}
    >>> withhold_unlikely_lateral(main); main["verdict"]  # main divides keep the decision's outcome
    'b'
    """
    p = row.get("motion_probability")
    if row["divide_kind"] == "lateral" and row["verdict"] in ("a", "b") and p is not None and p < LIKELY_MOTION:
        row.update(verdict="undetermined", moves_toward="undetermined", basis="undetermined",
                   reason=UNLIKELY_LATERAL_REASON)


def neighbour_scores(near: Sequence[Sequence[int]], scores: Sequence[float | None], moved: Sequence[float | None],
                     chain_cells: float | None = None) -> list[float | None]:
    """Each main segment's largest neighbour score: the largest instability of the other main segments within
    :data:`NEIGHBOUR_CELLS` of it, or of those scored at least :data:`NEIGHBOUR_SCORE` that reach it through a chain
    of main segments, each that near the next, scored below :data:`RUN_ORDER_BELOW` (or unknown) and moved at least
    ``chain_cells`` (default :data:`CHAIN_CELLS`) by either landscape run; None where no scored segment is that near.

    Parameters
    ----------
    near : sequence of sequences of int
        For each segment, the indices of the others within :data:`NEIGHBOUR_CELLS` (both ways).
    scores : sequence of float or None
        Each segment's instability (None: unknown).
    moved : sequence of float or None
        Each segment's larger |shift| of the two landscape runs (model cells; None: neither measured it).
    chain_cells : float, optional

    Examples
    --------
    >>> near = [[1], [0, 2], [1, 3], [2]]  # four segments in a row
    >>> neighbour_scores(near, [0.8, 1e-6, 1e-6, 1e-6], [2.0, 1.5, 0.3, 1.2])  # the second passes 0.8 on
    [1e-06, 0.8, 0.8, 1e-06]
    """
    chain = CHAIN_CELLS if chain_cells is None else chain_cells
    value: list[float | None] = [None] * len(scores)

    def lift(k: int, score: float | None) -> None:
        if score is not None:
            value[k] = score if value[k] is None else max(value[k], score)

    def conduit(k: int) -> bool:
        return (scores[k] is None or scores[k] < RUN_ORDER_BELOW) and (moved[k] or 0.0) >= chain

    for k, score in enumerate(scores):
        for j in near[k]:
            lift(j, score)
        if score is None or score < NEIGHBOUR_SCORE:
            continue
        stack = [j for j in near[k] if conduit(j)]  # the chains from a strongly scored segment
        seen = set(stack)
        while stack:
            for j in near[stack.pop()]:
                if j != k:
                    lift(j, score)
                    if j not in seen and conduit(j):
                        seen.add(j)
                        stack.append(j)
    return value


def _run_moves(evidence: dict) -> float | None:
    """The one-uplift-rate run's shift of a segment the decision abstained on, when it is at least
    :data:`RUNS_AGREE_CELLS` and the per-basin run does not move the divide as far the other way; else None."""
    one_u, per_basin = run_shifts(evidence)
    if one_u is None or per_basin is None or abs(one_u) < RUNS_AGREE_CELLS:
        return None
    return one_u if math.copysign(1.0, one_u) * per_basin > -RUNS_AGREE_CELLS else None


def _row(seg: DivideSegment, pts, contrasts, verdict) -> dict:
    probs = verdict.probabilities
    chi = next((c for c in contrasts if c.metric == "chi"), None)
    return {"seg": seg, "verdict": verdict.moves_toward, "basis": verdict.basis, "reason": verdict.reason,
            "confidence": verdict.confidence, "moves_toward": verdict.moves_toward,
            "probabilities": probs, "n_points": int(pts.size), "contrasts": [c.to_dict() for c in contrasts],
            # share of points where both sides drain away from the divide: low on divides between
            # neighbouring basins that drain the same way, where metrics are less telling
            "facing_share": float(np.mean(pts.facing >= MIN_FACING)) if pts.size else 0.0,
            "mean_chi_a": None if chi is None else chi.a, "mean_chi_b": None if chi is None else chi.b}


def _fields(flow: FlowGraph, config: AssessConfig, threshold: float):
    """Near-divide fields kept only for the reference cells the segments are read at (memory: see UpstreamMean)."""
    return near_divide_fields(flow, config.relief_radius_m,
                              reference_area_m2=config.reference_area_m2 or threshold)


def _judge_pooled(pts, row: dict, st: dict) -> dict:
    """Contrasts and the calibrated decision on pooled samples (see :func:`divides.assess.pooling.pool_short`)."""
    config: AssessConfig = st["config"]
    contrasts = compute_contrasts(pts, block_points=st["block"], n_boot=st["n_boot"], base_level_m=row["base"],
                                  seed=config.seed, dem_error=st["dem_error"], cell_m=st["cell"],
                                  mirrored=row["mirrored"])
    verdict = decide(contrasts, same_channel=row["mirrored"], min_confidence=config.min_confidence)
    pooled = _row(row["seg"], pts, contrasts, verdict)
    pooled["mean_chi_a"], pooled["mean_chi_b"] = row["mean_chi_a"], row["mean_chi_b"]  # the segment's own χ
    return pooled


def run_block(shape: tuple[int, int], min_area_m2: float, cell_area_m2: float) -> int:
    """DEM cells per model cell along a side for the landscape runs: the largest whole number b at which the smallest
    basin screened spans at least :data:`RUN_CHECKED_CELLS` model cells, but no more than the 300-cell side of
    :data:`divides.model.forward_run.MAX_CELLS` asks and no fewer than :data:`RUN_MAX_SIDE` does (round 41).

    Examples
    --------
    >>> run_block((4000, 4000), 5e6, 900.0)  # 5 km² basins of 30 m cells: 5e6 / (4 x 30)² = 347 model cells
    4
    >>> run_block((250, 180), 250 * 900.0, 900.0), run_block((20000, 20000), 5e6, 900.0)  # small DEM; cost bound
    (1, 17)
    """
    side = max(shape)
    today = max(1, math.ceil(side / MAX_CELLS))
    fits = max(1, math.floor(math.sqrt(float(min_area_m2) / (RUN_CHECKED_CELLS * float(cell_area_m2)))))
    return max(math.ceil(side / RUN_MAX_SIDE), min(today, fits))


def _landscape_evidence(dem: Dem, flow: FlowGraph, rows: list[dict], labels: np.ndarray, outlet_of: np.ndarray,
                        config: AssessConfig, threshold: float, min_area_m2: float, workers: int = 1) -> dict:
    """Each segment's lines of evidence beyond its near-divide contrasts.

    ``forward_shift_cells`` and ``forward_shift_basin_cells``: the segment's shift (model cells into side b;
    NaN when not measured) in two runs of the whole DEM under its steady balance
    (:func:`divides.model.landscape_shift.landscape_shifts`), with one uplift rate and with one per outlet
    basin (which absorbs a contrast between whole basins), the pieces judged between the outlet basins of
    their two sides; ``hilltop_contrast``: :func:`divides.assess.hilltops.hilltop_contrast` on the DEM's curvature
    fitted over the DEM error's correlation length (:func:`divides.assess.hilltops.hilltop_curvature`).
    Returns the run's grid: ``model_cell_m``, ``block``, ``years_at_unit_k``, ``steps``, and
    ``smallest_basin_model_cells`` (``min_area_m2`` in model cells) with ``coarse_for_basins`` (fewer than
    :data:`RUN_BASIN_CELLS`).
    """
    from divides.terrain.tiled_flow import tiled_routing

    options = dict(theta=float(config.theta), n=float(config.n), closed_edges=config.closed_edges,
                   channel_area_m2=threshold)
    with tiled_routing(None):  # the model grid is at most RUN_MAX_SIDE cells a side: routed in memory even with --tiled
        block = run_block(dem.shape, min_area_m2, float(np.median(dem.cell_area)))
        start = model_start(dem, block=block, **options)
        runs = landscape_shifts(dem, balances=("steady", "steady-basins"), start=start, workers=workers, **options)
    cell = float(np.max(dem.cell_size_m))
    error = config.dem_error(cell)
    transience = basin_transience(start, float(config.n))
    spread = transience_spread(start, float(config.n), error, seed=config.seed)
    sides = outlet_of[runs[0].on_model_grid(labels)]
    reach = max(1, round(error.length_m / cell))  # the curvature's window radius (hilltop_curvature's R)
    area = np.asarray(flow.area, dtype=np.float64).reshape(dem.shape)
    for r in rows:
        seg = r["seg"]
        a, b = int(outlet_of[seg.label_a]), int(outlet_of[seg.label_b])
        r["forward_shift_cells"], r["forward_shift_basin_cells"] = (run.piece_shift(seg.line, sides, a, b)
                                                                    for run in runs)
        basins = runs[0].piece_basins(seg.line, sides, a, b)
        r["transience_a"], r["transience_b"] = (float(transience[k]) if k else math.nan for k in basins)
        r["transience_sd_a"], r["transience_sd_b"] = (float(spread[k]) if k else math.nan for k in basins)
        r["hilltop_contrast"] = _hilltop_contrast(dem, area, labels, seg, reach)
    first = runs[0]  # the grid is shared; the one-U run's horizon and steps
    smallest = float(min_area_m2) / float(np.median(start.grid.cell_area))
    return {"model_cell_m": first.cell_m, "block": first.factor, "years_at_unit_k": first.years_unit_k,
            "steps": first.n_steps, "smallest_basin_model_cells": smallest,
            "coarse_for_basins": smallest < RUN_BASIN_CELLS}


def _hilltop_contrast(dem: Dem, area: np.ndarray, labels: np.ndarray, seg: DivideSegment, reach: int) -> float:
    """:func:`divides.assess.hilltops.hilltop_contrast` of a segment, its curvature (window radius ``reach``) and
    drainage area in cells (``area`` / max(cell area, 1e-300)) computed on the part of the grid it reads, widened by
    ``reach``: the values of the whole grid (each window sees the same cells), without two grid-sized arrays."""
    r0, r1, c0, c1 = hilltop_window(seg.line, dem.shape)
    a0, a1 = max(0, r0 - reach), min(dem.shape[0], r1 + reach)
    b0, b1 = max(0, c0 - reach), min(dem.shape[1], c1 + reach)
    curvature = hilltop_curvature(dem.elevation[a0:a1, b0:b1], dem.valid[a0:a1, b0:b1], dem.dx[a0:a1],
                                  dem.dy[a0:a1], reach)
    cell_area = np.where(dem.valid[a0:a1, b0:b1], dem.cell_area[a0:a1, None], 0.0)
    area_cells = area[a0:a1, b0:b1] / np.maximum(cell_area, 1e-300)
    return hilltop_contrast(seg.line, labels, seg.label_a, seg.label_b, curvature, area_cells, origin=(a0, b0))


def _run_tasks(tasks: list[tuple], shared: _Shared, n_workers: int, scheduler: str | None) -> list[list[dict]]:
    """Assess every basin pair as Dask tasks: threads here, or the cluster at ``scheduler``."""
    chunk = max(1, len(tasks) // (8 * n_workers))
    chunks = [tasks[i: i + chunk] for i in range(0, len(tasks), chunk)]
    if scheduler is not None:
        from divides.terrain.cluster import cluster_client

        with cluster_client(scheduler) as client:
            remote = client.scatter(shared, broadcast=True)
            groups = client.gather(client.map(_assess_pairs, chunks, shared=remote, pure=False))
    elif n_workers == 1 or len(chunks) <= 1:
        groups = [_assess_pairs(c, shared) for c in chunks]
    else:
        import dask

        groups = dask.compute(*[dask.delayed(_assess_pairs, pure=False)(c, shared) for c in chunks],
                              scheduler="threads", num_workers=n_workers)
    return [r for group in groups for r in group]


def screen(
    dem: Dem,
    *,
    min_basin_area_m2: float | None = None,
    level: str = "tributaries",
    max_segment_m: float | None = None,
    min_judged_m: float | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    runoff: np.ndarray | None = None,
    erodibility_raster: np.ndarray | None = None,
    uplift_raster: np.ndarray | None = None,
    forward_run: bool = True,
    **options,
) -> Screening:
    """Screen every divide of a DEM for instability.

    Parameters
    ----------
    dem : Dem
    min_basin_area_m2 : float, optional
        Smallest basin whose divides are screened (default: 5 × the channel threshold).
    level : {"tributaries", "outlets", "edges"}
        Which basins (see :func:`divides.terrain.basins.basin_labels`).
    max_segment_m : float, optional
        Longer divide segments are cut into pieces (default: 100 cells).
    min_judged_m : float, optional
        Shorter segments are judged on the samples of the segments that continue them along
        the divide, pooled up to this length (default :data:`MIN_JUDGED_CELLS` cells; see
        :func:`divides.assess.pooling.pool_short`).
    workers : int, optional
        Threads on this machine (default: the number of cores); ignored with ``scheduler``.
    scheduler : str, optional
        Address of a Dask scheduler (``tcp://host:8786``): basin pairs run as
        tasks on that cluster, the shared grids scattered once to each worker.
    runoff, erodibility_raster, uplift_raster : ndarray, optional
        Rasters on the DEM grid weighting χ (see :func:`divides.profiles.chi_weights`);
        without them χ assumes uniform climate, rock and uplift, and a χ-only
        verdict across a rock or climate contrast can point the wrong way
        (Forte & Whipple 2018).
    forward_run : bool
        Read two lines of landscape evidence beside the near-divide contrasts (default): each
        segment's shift in two forward runs of the whole DEM under its steady balance (0.3
        response times, K unknown, D and one U, or one U per outlet basin, fitted so the present
        surface is the model's steady state; :func:`divides.model.landscape_shift.landscape_shifts`)
        and its hilltop-curvature contrast (:func:`divides.assess.hilltops.hilltop_contrast`); the
        instability then follows :data:`INSTABILITY_EVIDENCE`. False: the near-divide contrasts alone
        (:data:`INSTABILITY_SCALING`), a few seconds sooner and with more alarms in steady
        landscapes on the regional benchmark (docs/validation.md).
    **options
        Fields of :class:`divides.config.AssessConfig` (``theta`` must be a number here).

    Returns
    -------
    Screening
        Judged segments ranked by instability (:func:`instability_of`: P(toward a) + P(toward b)
        of the calibrated decision, :func:`divides.assess.verdict.decide`, rescaled to the
        regional benchmark's truth of the segment's divide kind, ``divide_kind``; None, ranked last,
        when it abstained for insufficient data; with the forward run, segments scored below
        :data:`RUN_ORDER_BELOW` by their neighbours and the runs' shifts, :func:`rank_key`, main and lateral
        segments interleaved by :func:`interleave_kinds` where told less than :data:`PROMOTE_TOLD_ERROR_M`; that
        score is ``ranking_score``, and ``instability`` is it never above ``motion_probability``,
        :func:`~divides.assess.segment_motion.bounded_instability`); every other
        stretch of divide between two basins is a gap with its reason, and ``coverage`` gives the judged
        share of the divides between outlet basins.
    """
    config = AssessConfig.from_options(**{**options, "forward_run": bool(forward_run)})
    if isinstance(config.theta, str):
        raise ParameterError("screen needs a fixed theta (e.g. 0.45); estimate it with `divides inspect` first")
    dem, voids = fill_voids(dem, config.voids)  # before routing: its label grid then adds nothing to the peak
    flow = route(dem, conditioning=config.conditioning, sea_level=config.sea_level_m,
                 closed_edges=config.closed_edges)
    channels = extract_channels(flow, threshold_m2=config.channel_area_m2,
                                default=functools.partial(bounded_channel_threshold, max_share=CHANNEL_AREA_SHARE,
                                                          min_cells=CHANNEL_AREA_MIN_CELLS))
    threshold = channels.threshold.value_m2
    min_area = float(min_basin_area_m2) if min_basin_area_m2 is not None else 5.0 * threshold
    labels = basin_labels(flow, min_area_m2=min_area, level=level)
    n_basins = _check_two_basins(flow, labels, min_area, level)
    cell = float(np.max(dem.cell_size_m))
    max_len = float(max_segment_m) if max_segment_m is not None else 100.0 * cell
    if not (np.isfinite(max_len) and max_len > 4 * cell):
        raise ParameterError(f"max segment length must exceed four cells ({4 * cell:g} m); got {max_segment_m!r}")
    pool_m = float(min_judged_m) if min_judged_m is not None else MIN_JUDGED_CELLS * cell
    if not (np.isfinite(pool_m) and pool_m >= 0):
        raise ParameterError(f"min judged length must be a number of metres >= 0; got {min_judged_m!r}")
    # every traced piece is kept (min_vertices=2), so each stretch of divide ends up in a segment or a gap
    outlet_of = _outlet_basins(flow, labels, min_area, level)
    by_pair: dict[tuple[int, int], list[DivideSegment]] = {}
    gaps: list[dict] = []
    # the land in basins below the minimum area is traced as one more region, so that the divides beside it are
    # written as gaps too (on a flank drained by many small basins the main divide lies there)
    small = int(labels.max()) + 1
    for seg in divide_network(dem, np.where((labels == 0) & dem.valid, small, labels), min_vertices=2):
        if seg.label_b == small:  # label_a < label_b
            gaps.append(_empty(DivideSegment(seg.label_a, 0, seg.line, seg.cells_a, seg.cells_b), SMALL_BASINS_REASON))
            continue
        for piece in _split(seg.line, max_len):
            part = DivideSegment(seg.label_a, seg.label_b, piece, seg.cells_a, seg.cells_b)
            if piece.length_m < MIN_SEGMENT_CELLS * cell:
                gaps.append(_empty(part, f"shorter than {MIN_SEGMENT_CELLS} cells: too short to sample"))
            elif outlet_of[seg.label_a] == outlet_of[seg.label_b]:
                gaps.append(_empty(part, LATERAL_REASON))
            else:
                by_pair.setdefault((seg.label_a, seg.label_b), []).append(part)
    spacing = config.divide_spacing_m or 2.0 * cell
    chi_area, chi_weight = channels.area, 1.0
    if runoff is not None or erodibility_raster is not None or uplift_raster is not None:  # generalised χ
        w = chi_weights(flow, runoff=runoff, erodibility=erodibility_raster, uplift=uplift_raster, n=config.n)
        if w.discharge is not None:
            chi_area = w.discharge.ravel()[channels.cells]
        if not np.isscalar(w.factor):
            chi_weight = np.asarray(w.factor).ravel()[channels.cells]
    shared = _Shared({
        "flow": flow, "channels": channels, "labels_ch": labels.ravel()[channels.cells], "config": config,
        "theta": float(config.theta), "spacing": spacing, "reference": config.reference_area_m2 or threshold,
        "block": max(1, int(round((config.block_m or 10 * spacing) / spacing))),
        "n_boot": max(100, config.n_bootstrap // 2), "fields": _fields(flow, config, threshold),
        "chi_area": chi_area, "chi_weight": chi_weight,
        "dem_error": config.dem_error(cell), "cell": cell,
    })
    tasks = [(a, b, segs) for (a, b), segs in sorted(by_pair.items())]
    n_workers = max(1, min(workers or os.cpu_count() or 1, len(tasks) or 1))
    results = _run_tasks(tasks, shared, n_workers, scheduler)
    rows = [r for group in results for r in group]
    gaps += [r for r in rows if "gap" in r]
    outlets = label_outlets(flow, labels)
    rows = pool_short([r for r in rows if "gap" not in r], outlets=outlets, min_length_m=pool_m,
                      judge=lambda pts, row: _judge_pooled(pts, row, shared.data))
    directions = drainage_directions(labels, outlet_of, outlets)
    forward = (_landscape_evidence(dem, flow, rows, labels, outlet_of, config, threshold, min_area,
                                   workers=max(1, workers or os.cpu_count() or 1))  # the runs are local
               if config.forward_run else None)
    for r in rows:  # each kind of divide has its own calibration of the probability of motion
        r["divide_kind"] = kind_of(directions, r["seg"].label_a, r["seg"].label_b)
    rows = rank_segments(rows, [r["seg"].line.length_m for r in rows],
                         _main_neighbours(rows) if config.forward_run else None, dem_error_m=config.dem_error_m)
    out = []
    for rank, r in enumerate(rows, start=1):
        seg = r["seg"]
        victim = {"a": seg.label_a, "b": seg.label_b}.get(r["moves_toward"])
        out.append({
            "rank": rank, "instability": bounded_instability(r["instability"], r["motion_probability"]),
            "ranking_score": r["instability"], "motion_probability": r["motion_probability"],
            "confidence": r["confidence"],
            "length_m": seg.line.length_m, "basins": [seg.label_a, seg.label_b],
            "moves_toward_basin": victim,
            "motion_azimuth_deg": (motion_azimuth(seg.line, dem, r["moves_toward"], r["judged_lines"])
                                   if victim is not None else None),
            "verdict": r["verdict"], "basis": r["basis"], "reason": r["reason"],
            "probabilities": r["probabilities"], "n_points": r["n_points"], "facing_share": r["facing_share"],
            "mean_chi_a": r["mean_chi_a"], "mean_chi_b": r["mean_chi_b"], "contrasts": r["contrasts"],
            "judged_length_m": r["judged_length_m"], "divide_kind": r["divide_kind"],
            "filled_share": voids.share_along(seg.line.row, seg.line.col),
            **{k: finite_or_none(r.get(k)) for k in EVIDENCE_KEYS},
            "line": seg.line, "judged_lines": r["judged_lines"], "judged_pairs": r["judged_pairs"],
        })
    gap_rows = [{"basins": [g["seg"].label_a, g["seg"].label_b], "length_m": g["seg"].line.length_m,
                 "reason": g["gap"], "line": g["seg"].line} for g in gaps]
    share = _labelled_area_share(dem, labels, config.sea_level_m)
    coverage = _coverage(out, gap_rows, outlet_of) | {"screened_area_share": share}
    if share < SCREENED_SHARE_CAUTION:
        coverage["smaller_basin_shares"] = _smaller_basin_shares(dem, flow, threshold, min_area, level,
                                                                 config.sea_level_m)
    weighted = runoff is not None or erodibility_raster is not None or uplift_raster is not None
    used = {k: v for k, v in config.to_dict().items() if k in _USED_OPTIONS}
    params = {**used, "chi_weighted": weighted,
              "min_basin_area_m2": min_area, "level": level, "max_segment_m": max_len, "min_judged_m": pool_m,
              "channel_area_used_m2": threshold, "channel_area_source": channels.threshold.source,
              "channel_area_reason": channels.threshold.reason,
              "divide_spacing_used_m": spacing, "workers": n_workers if scheduler is None else "cluster"}
    if forward is not None:
        params["forward_run_grid"] = forward
    holes = raster_holes_cells(dem, runoff=runoff, erodibility=erodibility_raster, uplift=uplift_raster)
    if holes:  # cells where a raster has no value read its reference (profiles.chi.chi_weights)
        params["raster_holes_cells"] = holes
    return Screening(dem=dem, flow=flow, channels=channels, labels=labels, segments=out, parameters=params,
                     gaps=gap_rows, coverage=coverage, n_basins=n_basins,
                     voids=voids)
