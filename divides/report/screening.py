"""Outputs of a regional screening: segments.geojson, segments.csv, screening.json, a map and report.html."""

from __future__ import annotations

import base64
import datetime as _dt
import os
import textwrap
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from matplotlib import colormaps
from matplotlib.collections import LineCollection
from matplotlib.cm import ScalarMappable
from matplotlib.colors import Normalize
from matplotlib.lines import Line2D
from scipy import ndimage

from divides.assess.missing_data import interior_nodata_note, raster_holes_note
from divides.assess.screen import (CHAIN_CELLS, EVIDENCE_KEYS, NEIGHBOUR_CELLS, NEIGHBOUR_SCORE, RUN_BASIN_CELLS,
                                   SCREENED_SHARE_CAUTION)
from divides.assess.segment_motion import LIKELY_MOTION, run_size
from divides.assess.verdict import CAUTION
from divides.io.writing import atomic_write, write_feature_collection, write_json, write_text
from divides.report import html as _html

from divides.report import figures as _figures
from divides.report.figures import (_HALO, _display_extent, _figure, _frame, _hillshade, _map_size, filled_voids,
                                    map_furniture, to_png)
from divides.report.labels import parameter_label, parameter_value, probability_text
from divides.report.layers import _feature, _lonlat, csv_text, filled_void_features
from divides.report.follow_up import assess_command, basin_sides, follow_up_segments
from divides.report.provenance import provenance as _provenance
from divides.report.provenance import public_summary
from divides.report.text import provenance_line
from divides.report.writer import staged_output
from divides.terrain.basins import EDGE_LABELS

if TYPE_CHECKING:  # pragma: no cover - types only
    from divides.assess.screen import Screening

__all__ = ["write_screening", "segment_features", "segment_rows", "gap_features", "regional_map", "coarse_runs_note",
           "unmeasured_runs_note", "runs_notes", "UNMEASURED_NOTE_SHARE", "basin_text", "edge_of", "confidence_text",
           "area_of", "data_notes", "filled_segments_note", "small_basins_note"]

#: Segments whose rank is written on the map (the top of the report's table).
MAP_RANKS = 25

_COLUMNS = ("rank", "instability", "ranking_score", "motion_probability", "confidence", "length_m", "basin_1",
            "basin_2", "moves_toward_basin", "motion_azimuth_deg", "verdict", "basis", "n_points", "facing_share",
            "divide_kind", "filled_share", *EVIDENCE_KEYS, "x_mid", "y_mid", "side_1", "side_2")


#: Works the screening report cites, in full (author, year, title, where published); every author-year cited
#: in its methods has its entry here (tests/report/test_screening.py). Those the assessment report lists too
#: are taken from its list.
SCREENING_REFERENCES = tuple(sorted(
    [r for r in _html.REFERENCES if r.startswith(("Forte, A. M., Whipple, K. X.", "Scherler, D.", "Willett, S. D."))] + [
        "Gilbert, G. K. (1877). Report on the Geology of the Henry Mountains. U.S. Geographical and Geological "
        "Survey of the Rocky Mountain Region, Washington.",
        "Hurst, M. D., Mudd, S. M., Walcott, R., Attal, M., Yoo, K. (2012). Using hilltop curvature to derive the "
        "spatial distribution of erosion rates. Journal of Geophysical Research: Earth Surface 117, F02017.",
        "Perron, J. T., Kirchner, J. W., Dietrich, W. E. (2009). Formation of evenly spaced ridges and valleys. "
        "Nature 460, 502–505.",
        "Platt, J. C. (1999). Probabilistic outputs for support vector machines and comparisons to regularized "
        "likelihood methods. In Advances in Large Margin Classifiers, MIT Press, 61–74.",
        "Roering, J. J., Perron, J. T., Kirchner, J. W. (2007). Functional relationships between denudation and "
        "hillslope form and relief. Earth and Planetary Science Letters 264, 245–258.",
        "Royden, L., Perron, J. T. (2013). Solutions of the stream power equation and application to the "
        "evolution of river longitudinal profiles. Journal of Geophysical Research: Earth Surface 118, 497–518.",
        "Whipple, K. X., Tucker, G. E. (1999). Dynamics of the stream-power river incision model: implications "
        "for height limits of mountain ranges, landscape response timescales, and research needs. Journal of "
        "Geophysical Research 104(B8), 17661–17674.",
    ]))


#: The known limits every screening report states (measured on the regional model landscapes, docs/methods.md §7b).
SCREENING_LIMITS = (
    "<b>Known limits</b> (on model landscapes whose motion was measured): a steady contrast of uplift, rock strength "
    "or runoff can look like a moving divide, most of all a step of uplift that crosses the basins (an active "
    "fault, say), which no line of evidence here tells from a knickpoint climbing them; a change of rock strength "
    "or runoff that the topography does not show yet goes unseen; where a divide moves along part of its length, "
    "still segments next to the moving stretch can rank among it; DEM error lowers every figure."
)


def coarse_runs_note(parameters: dict) -> str | None:
    """The caution a screening carries when its landscape runs resolve the smallest screened basin in fewer than
    :data:`divides.assess.screen.RUN_BASIN_CELLS` model cells (``forward_run_grid``; None otherwise).

    Examples
    --------
    >>> coarse_runs_note({"forward_run_grid": {"smallest_basin_model_cells": 28.0, "coarse_for_basins": True,
    ...                                        "block": 14}})[:53]
    'The landscape runs are coarse for the smallest basins'
    >>> coarse_runs_note({"forward_run_grid": {"smallest_basin_model_cells": 250.0, "coarse_for_basins": False}})
    """
    grid = parameters.get("forward_run_grid") or {}
    if not grid.get("coarse_for_basins"):
        return None
    block = int(grid.get("block", 1))
    finer = ("screen a smaller window of the DEM (--bounds), which the runs resolve more finely, or raise "
             "--min-basin-area" if block > 1 else "raise --min-basin-area")
    return (f"The landscape runs are coarse for the smallest basins: the smallest basin screened spans "
            f"{grid['smallest_basin_model_cells']:.0f} model cells of {block} × {block} DEM cells, and on model "
            f"landscapes moving divides were missed more often below {RUN_BASIN_CELLS:g}. Low instabilities and "
            f"probabilities of motion here are weak evidence that a divide is still; {finer}.")


#: A screening says how many of its scored main-divide segments neither landscape run measured when they are at least
#: this share of them (a reporting rule, not fitted: on the regional benchmark's cases about 2 % are, at
#: ``--level edges`` most can be, since a long piece spans several of the runs' basins a side).
UNMEASURED_NOTE_SHARE = 0.25


def unmeasured_runs_note(segments: list[dict], parameters: dict) -> str | None:
    """The caution a screening carries when its landscape runs (``parameters["forward_run"]``) measured too few of
    its scored main-divide segments (:data:`UNMEASURED_NOTE_SHARE`; None otherwise, and without the runs).

    Examples
    --------
    >>> seg = {"divide_kind": "main", "instability": 0.0, "forward_shift_cells": None,
    ...        "forward_shift_basin_cells": None}
    >>> unmeasured_runs_note([seg, {**seg, "forward_shift_cells": 0.4}, seg], {"forward_run": True})[:58]
    'The landscape runs did not measure 2 of the 3 main-divide '
    >>> unmeasured_runs_note([{**seg, "forward_shift_cells": 0.4}] * 4 + [seg], {"forward_run": True}) is None
    True
    >>> unmeasured_runs_note([seg], {"forward_run": False}) is None  # no runs were made
    True
    """
    if not parameters.get("forward_run"):
        return None
    main = [s for s in segments if s.get("divide_kind") == "main" and s.get("instability") is not None]
    unmeasured = sum(run_size(s) is None for s in main)
    if not main or unmeasured < UNMEASURED_NOTE_SHARE * len(main):
        return None
    return (f"The landscape runs did not measure {unmeasured} of the {len(main)} main-divide segments scored (a piece "
            "that spans several of the runs' basins on a side, as at --level edges, is not measured). Their "
            "instability reads no run evidence as no motion; they rank by their probability of motion when it "
            "is 0.5 or more, and a low score there is not evidence that the divide is still.")


def no_main_divide_note(segments: list[dict], parameters: dict) -> str | None:
    """The caution a screening carries when it judged segments but none on a main divide (between basins that drain
    apart; None otherwise, and at ``--level edges``, whose basins are the edges' own).

    The basins beyond a range's crest can all be smaller than the minimum basin area, as where the DEM reaches only a
    little past it: the crest is then a gap of that reason and the coverage of the divides between outlet basins can
    still read 100 %.

    Examples
    --------
    >>> no_main_divide_note([{"divide_kind": "lateral"}], {"min_basin_area_m2": 2.5e6, "level": "tributaries"})[:48]
    'No judged segment lies on a main divide (between'
    >>> no_main_divide_note([{"divide_kind": "main"}, {"divide_kind": "lateral"}], {"level": "tributaries"}) is None
    True
    """
    if not segments or parameters.get("level") == "edges" or any(s.get("divide_kind") == "main" for s in segments):
        return None
    return ("No judged segment lies on a main divide (between basins that drain apart): every two neighbouring basins "
            "screened drain the same way. If the DEM holds a range's crest, the basins beyond it are smaller than the "
            f"minimum basin area ({parameters.get('min_basin_area_m2', float('nan')) / 1e6:.3g} km²) and the crest "
            "is a gap (layers/screen_gaps.geojson); a smaller --min-basin-area screens it.")


def small_basins_note(coverage: dict, parameters: dict) -> str | None:
    """The caution a screening carries when less than half the DEM (its land, with a sea level) drains through the
    basins screened, the rest through basins smaller than the minimum basin area (None otherwise): a DEM drained
    mostly by short basins, or a minimum basin area too large for it, leaves most of the land unread, whatever the
    coverage of the divides between the outlet basins screened says.

    Where the screening measured what smaller basins would drain (``smaller_basin_shares``), the note names them, so
    that the user can pick a ``--min-basin-area``; smaller basins have shorter divides, more of them judged on too few
    samples.

    Examples
    --------
    >>> small_basins_note({"screened_area_share": 0.04}, {"min_basin_area_m2": 1.1e6})[:80]
    'Only 4 % of the DEM drains through basins of at least the minimum basin area (1.'
    >>> smaller = [{"min_basin_area_m2": 4.4e5, "screened_area_share": 0.44},
    ...            {"min_basin_area_m2": 2.2e5, "screened_area_share": 0.91}]
    >>> note = small_basins_note({"screened_area_share": 0.34, "smaller_basin_shares": smaller},
    ...                          {"min_basin_area_m2": 1.1e6})
    >>> note[note.index("Basins"):note.index(":", note.index("Basins"))]
    'Basins of at least 0.44 km² drain 44 %, of at least 0.22 km² 91 %'
    >>> small_basins_note({"screened_area_share": 0.54}, {"min_basin_area_m2": 1.1e6}) is None
    True
    """
    share = coverage.get("screened_area_share", 1.0)
    if share >= SCREENED_SHARE_CAUTION:
        return None
    head = (f"Only {100 * share:.0f} % {area_of(parameters)} drains through basins of at least the minimum basin "
            f"area ({parameters.get('min_basin_area_m2', float('nan')) / 1e6:.3g} km²): the divides of the rest "
            "were not screened")
    smaller = coverage.get("smaller_basin_shares") or []
    if not smaller:
        return head + ", and a smaller --min-basin-area screens them."
    shares = [f"{s['min_basin_area_m2'] / 1e6:.3g} km²{' drain' if i == 0 else ''} "
              f"{100 * s['screened_area_share']:.0f} %" for i, s in enumerate(smaller)]
    return (f"{head}. Basins of at least {', of at least '.join(shares)}: a smaller --min-basin-area screens them, "
            "with shorter divides, more of them judged on too few samples.")


def area_of(parameters: dict) -> str:
    """What the screened area share is a share of: the DEM, or its land above ``--sea-level`` when one was given.

    Examples
    --------
    >>> area_of({"sea_level_m": 150.0})
    "of the DEM's land (above the sea level of 150 m)"
    """
    sea = parameters.get("sea_level_m")
    return "of the DEM" if sea is None else f"of the DEM's land (above the sea level of {sea:g} m)"


def runs_notes(result: Screening) -> list[str]:
    """The cautions a screening's landscape runs call for (:func:`coarse_runs_note`, :func:`unmeasured_runs_note`),
    as the report and the command line print them."""
    notes = (coarse_runs_note(result.parameters), unmeasured_runs_note(result.segments, result.parameters))
    return [n for n in notes if n is not None]


#: Ranks listed by name in :func:`filled_segments_note`.
FILLED_RANKS_LISTED = 10


def filled_segments_note(segments: list[dict]) -> str | None:
    """The caution for segments that run over holes of nodata filled by interpolation; None when none does.

    Examples
    --------
    >>> filled_segments_note([{"rank": 2, "filled_share": 0.4}, {"rank": 5, "filled_share": 0.0},
    ...                       {"rank": 9, "filled_share": 0.12}])  # doctest: +ELLIPSIS
    'Segments ranked 2 and 9 run partly over holes of nodata filled by interpolation (up to 40 % of their length)...'
    """
    over = [(s["rank"], s.get("filled_share") or 0.0) for s in segments if (s.get("filled_share") or 0.0) > 0]
    if not over:
        return None
    ranks = [str(r) for r, _ in over[:FILLED_RANKS_LISTED]]
    listed = ranks[0] if len(ranks) == 1 else ", ".join(ranks[:-1]) + " and " + ranks[-1]
    more = f" (and {len(over) - len(ranks)} more)" if len(over) > len(ranks) else ""
    return (f"Segment{'s' if len(over) > 1 else ''} ranked {listed}{more} run{'' if len(over) > 1 else 's'} partly "
            f"over holes of nodata filled by interpolation (up to {100 * max(f for _, f in over):.0f} % of their "
            "length): their verdicts read interpolated ground there.")


def data_notes(result: Screening) -> list[str]:
    """The cautions the data call for: a weighting raster's holes, nodata inside the DEM's data and the segments
    over it once filled (:func:`filled_segments_note`), no main divide judged (:func:`no_main_divide_note`) or else
    most of the land left to basins below the minimum area (:func:`small_basins_note`)."""
    no_main = no_main_divide_note(result.segments, result.parameters)
    notes = (raster_holes_note(result.parameters, result.dem.n_valid),
             interior_nodata_note(result.voids, result.dem.n_valid),
             filled_segments_note(result.segments),
             no_main if no_main is not None else small_basins_note(result.coverage or {}, result.parameters))
    return [n for n in notes if n is not None]


#: What the instability is, with the landscape evidence (True) and from the near-divide contrasts alone.
INSTABILITY_WORDS = {True: "instability: a score ranking how likely the segment moves, at most P(moving) (0–1)",
                     False: "instability = calibrated probability that the segment moves"}

#: The divide column of the report's table (``divide_kind`` of segments.csv).
_KIND_WORDS = {"main": "main (basins drain apart)", "lateral": "lateral (basins drain the same way)"}


def segment_rows(result: Screening, sides: dict[int, str] | None = None) -> list[dict]:
    """One table row per segment (the columns of segments.csv); ``sides``: :func:`basin_sides` of ``result``."""
    sides = basin_sides(result) if sides is None else sides
    rows = []
    for s in result.segments:
        line = s["line"]
        mid = line.x.size // 2
        rows.append({
            "rank": s["rank"], "confidence": s["confidence"],
            "instability": None if s["instability"] is None else round(float(s["instability"]), 4),
            "ranking_score": None if s.get("ranking_score") is None else round(float(s["ranking_score"]), 4),
            # two decimals, as its calibration error on held-out model landscapes (0.01-0.08) supports, and never 0
            # or 1: a model's probability is not a certainty
            "motion_probability": None if s.get("motion_probability") is None
            else round(min(max(float(s["motion_probability"]), 0.01), 0.99), 2),
            "length_m": round(float(s["length_m"]), 1), "basin_1": s["basins"][0], "basin_2": s["basins"][1],
            "moves_toward_basin": s["moves_toward_basin"],
            "motion_azimuth_deg": None if s["motion_azimuth_deg"] is None else round(s["motion_azimuth_deg"], 1),
            "verdict": s["verdict"], "basis": s["basis"], "n_points": s["n_points"],
            "facing_share": round(float(s["facing_share"]), 3), "divide_kind": s["divide_kind"],
            "filled_share": round(float(s.get("filled_share", 0.0)), 3),
            **{k: None if s.get(k) is None else round(float(s[k]), 3)
               for k in EVIDENCE_KEYS},
            "x_mid": float(line.x[mid]), "y_mid": float(line.y[mid]),
            "side_1": sides.get(int(s["basins"][0])), "side_2": sides.get(int(s["basins"][1])),
        })
    return rows


def segment_features(result: Screening, rows: list[dict] | None = None) -> list[dict]:
    """RFC 7946 LineString features (WGS 84 lon/lat), one per segment, ranked; ``rows``: its :func:`segment_rows`."""
    features = []
    rows = segment_rows(result) if rows is None else rows
    for s, row in zip(result.segments, rows):  # the values rounded as in segments.csv
        line = s["line"]
        lon, lat = _lonlat(result.dem, line.x, line.y)
        props = {k: row[k] for k in ("rank", "instability", "ranking_score", "motion_probability", "confidence",
                                     "length_m")}
        props["basins"] = [int(b) for b in s["basins"]]
        props.update({k: row[k] for k in ("moves_toward_basin", "motion_azimuth_deg", "verdict", "basis",
                                          "n_points", "facing_share", "divide_kind", "filled_share",
                                          *EVIDENCE_KEYS)})
        features.append(_feature({"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()},
                                 props))
    return features


def gap_features(result: Screening) -> list[dict]:
    """RFC 7946 LineString features (WGS 84 lon/lat), one per stretch of divide left unjudged, with its reason."""
    return list(_iter_gap_features(result))


def _iter_gap_features(result: Screening):
    # one feature at a time, so a belt's layer is written without holding every vertex as Python floats
    for g in result.gaps:
        lon, lat = _lonlat(result.dem, g["line"].x, g["line"].y)
        yield _feature({"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()},
                       {"basins": [int(b) for b in g["basins"]], "length_m": round(float(g["length_m"]), 1),
                        "reason": g["reason"]})


def edge_of(label: int) -> str | None:
    """The DEM edge a label names at ``level="edges"`` (:data:`~divides.terrain.basins.EDGE_LABELS`), else None."""
    return next((edge for edge, k in EDGE_LABELS.items() if k == int(label)), None)


def confidence_text(segment: dict) -> str:
    """A segment's confidence as the table shows it: "unknown" where the decision abstained for insufficient data
    (its confidence of 0 is no evidence either way), else :func:`~divides.report.labels.probability_text`.

    Examples
    --------
    >>> confidence_text({"basis": "insufficient data", "confidence": 0.0}), confidence_text({"basis": "none",
    ...                                                                                       "confidence": 0.91})
    ('unknown', '0.91')
    """
    return "unknown" if segment.get("basis") == "insufficient data" else probability_text(segment["confidence"])


def basin_text(label: int, level: str | None, *, long: bool = False) -> str:
    """A basin's label as the report shows it: "B7"; at ``level="edges"``, where the labels are the edges'
    (:data:`~divides.terrain.basins.EDGE_LABELS`), with the edge's name ("B4 west", or "B4 (west edge)" when ``long``).

    Examples
    --------
    >>> basin_text(7, "tributaries"), basin_text(4, "edges"), basin_text(2, "edges", long=True)
    ('B7', 'B4 west', 'B2 (east edge)')
    """
    edge = edge_of(label) if level == "edges" else None
    if edge is None:
        return f"B{label}"
    return f"B{label} ({edge} edge)" if long else f"B{label} {edge}"


def likely_motion(segment: dict) -> bool:
    """Whether a segment's direction is drawn and written as motion: its probability of motion is at least
    :data:`LIKELY_MOTION` (or it has none). Otherwise the direction is the one the near-divide measures favour.

    Examples
    --------
    >>> likely_motion({"motion_probability": 0.07}), likely_motion({"motion_probability": 0.93})
    (False, True)
    """
    p = segment.get("motion_probability")
    return p is None or p >= LIKELY_MOTION


#: Why a segment likely to move (P(moving) of at least LIKELY_MOTION) can show a small instability: the score the
#: instability is bounded by asks both landscape runs to move it (docs/methods.md §7b).
SMALL_SCORE_NOTE = ("instability below 0.5 beside P(moving) of 0.5 or more: the score an alarm reads stays low "
                    "unless both landscape runs move the divide the favoured way; P(moving) is the calibrated "
                    "probability that the segment moves, and places main and lateral divides in one ranking.")


def small_score(segment: dict) -> bool:
    """Whether a segment is likely to move (:func:`likely_motion`, with a probability) while its instability, which
    an alarm reads, is below 0.5 (:data:`SMALL_SCORE_NOTE`).

    Examples
    --------
    >>> small_score({"instability": 1e-5, "motion_probability": 0.96}), small_score({"instability": 0.9,
    ...                                                                               "motion_probability": 0.96})
    (True, False)
    """
    p, i = segment.get("motion_probability"), segment.get("instability")
    return p is not None and i is not None and p >= LIKELY_MOTION and i < 0.5


def directions_text(segments: list[dict]) -> str:
    """How many segments the decision gives a direction, and how many of them are likely to move.

    Examples
    --------
    >>> directions_text([{"moves_toward_basin": 2, "motion_probability": 0.9},
    ...                  {"moves_toward_basin": 4, "motion_probability": 0.1}, {"moves_toward_basin": None}])
    '2 given a direction, 1 of them likely to move (P(moving) ≥ 0.5)'
    """
    directed = [s for s in segments if s.get("moves_toward_basin") is not None]
    likely = sum(likely_motion(s) for s in directed)
    return (f"{len(directed)} given a direction" if not directed else
            f"{len(directed)} given a direction, {likely} of them likely to move (P(moving) ≥ {LIKELY_MOTION:g})")


#: Arrow colour, width and legend by whether motion is likely (P(moving) >= LIKELY_MOTION, or no probability).
_ARROWS = {
    True: ("#009E73", 1.8, f"motion toward the victim basin (P(moving) ≥ {LIKELY_MOTION:g})"),
    False: ("0.45", 1.2, f"direction favoured, motion unlikely (P(moving) < {LIKELY_MOTION:g})"),
}


#: The colour bar's length as a share of the map's height, and its label's font size (points).
_BAR_SHRINK = 0.7
_BAR_LABEL_PT = 8.0


def bar_label(words: str, bar_in: float) -> str:
    """``words`` broken into lines no longer than a colour bar ``bar_in`` inches long (a character is taken as
    0.6 em wide: generous for matplotlib's default sans-serif), so the label reads beside its bar.

    Examples
    --------
    >>> print(bar_label("instability = calibrated probability that the segment moves", 2.0))
    instability = calibrated
    probability that the segment
    moves
    """
    per_line = max(12, int(bar_in * 72.0 / (0.6 * _BAR_LABEL_PT)))
    return textwrap.fill(words, per_line)


def regional_map(result: Screening):
    """Hillshade with every segment coloured by instability and arrows toward the victim basin."""
    dem = result.dem
    frame = _frame(dem)
    fig = _figure(*_map_size(dem, frame, extra=2.0))  # the map's height, plus title, axis labels and the legend
    ax = fig.add_subplot()
    _hillshade(ax, dem, frame)
    cmap = colormaps["plasma"]  # perceptually uniform, dark (low) to bright yellow (high): high contrast on grey
    norm = Normalize(0.0, 1.0)

    def xy(line, basins):
        keep = _between(line, result.labels, *basins)
        return np.column_stack([line.x[keep] * frame.scale, line.y[keep] * frame.scale])

    judged = [s for s in result.segments if s["instability"] is not None]
    unknown = [s for s in result.segments if s["instability"] is None]
    handles = filled_voids(ax, dem, frame, result.voids)
    if judged:
        lines = [xy(s["line"], s["basins"]) for s in judged]
        ax.add_collection(LineCollection(lines, colors="white", linewidths=5.0, zorder=3, capstyle="round"))
        ax.add_collection(LineCollection(lines, linewidths=3.0, zorder=3.1, capstyle="round",
                                         colors=[cmap(norm(s["instability"])) for s in judged]))
    if unknown:
        ax.add_collection(LineCollection([xy(s["line"], s["basins"]) for s in unknown], colors="0.2",
                                         linewidths=1.6, linestyles=(0, (4, 2)), zorder=3))
        handles.append(Line2D([], [], color="0.2", lw=1.6, ls=(0, (4, 2)), label="judged: insufficient data"))
    if result.gaps:
        ax.add_collection(LineCollection([xy(g["line"], g["basins"]) for g in result.gaps], colors="black",
                                         linewidths=1.0, linestyles=(0, (1, 1.5)), zorder=3))
        handles.append(Line2D([], [], color="black", lw=1.0, ls=(0, (1, 1.5)), label="not assessed (gap; see table)"))
    span = max(dem.bounds[2] - dem.bounds[0], dem.bounds[3] - dem.bounds[1]) * frame.scale
    kinds = set()
    for s in result.segments:
        if s["motion_azimuth_deg"] is None:
            continue
        # a direction the near-divide measures favour where the probability of motion is small is drawn apart:
        # on a hazard map an arrow reads as motion
        likely = likely_motion(s)
        kinds.add(likely)
        line = s["line"]
        mid = line.x.size // 2
        az = np.radians(s["motion_azimuth_deg"])
        length = 0.05 * span
        ax.annotate("", xy=(line.x[mid] * frame.scale + length * np.sin(az),
                            line.y[mid] * frame.scale + length * np.cos(az)),
                    xytext=(line.x[mid] * frame.scale, line.y[mid] * frame.scale),
                    arrowprops={"arrowstyle": "-|>", "color": _ARROWS[likely][0], "lw": _ARROWS[likely][1]},
                    zorder=4)
    for likely in sorted(kinds, reverse=True):
        color, width, label = _ARROWS[likely]
        handles.append(Line2D([], [], color=color, lw=width, marker=">", label=label))
    for s in result.segments[:MAP_RANKS]:  # the ranks of the table, at each segment's mid-point
        line = s["line"]
        mid = line.x.size // 2
        ax.text(line.x[mid] * frame.scale, line.y[mid] * frame.scale, str(s["rank"]), fontsize=7, ha="center",
                va="center", zorder=6, bbox={"boxstyle": "circle,pad=0.15", "fc": "white", "ec": "black", "lw": 0.6})
    handles.append(Line2D([], [], ls="none", marker="o", mfc="white", mec="black", ms=8,
                          label=f"rank (top {min(MAP_RANKS, len(result.segments))}, as in the table)"))
    left, right, bottom, top = _display_extent(dem, frame, 1)
    leaders, boxes = False, None
    for lab, row, col in _centroids(result.labels):  # basin labels at their centroids, clear of the furniture
        x, y = (float(v) * frame.scale for v in dem.xy(row, col))
        if _under_furniture((x - left) / (right - left), (y - bottom) / (top - bottom)):
            boxes = ndimage.find_objects(result.labels) if boxes is None else boxes  # one pass for all basins
            x, y, leader = _clear_spot(result.labels, lab, row, col, dem, frame, (left, right, bottom, top),
                                       boxes[lab - 1])
            if leader is not None:  # the whole basin is under the furniture: label beside it, a line to it
                ax.plot([x, leader[0]], [y, leader[1]], color="#0072B2", lw=0.6, zorder=5)
                leaders = True
        ax.text(x, y, basin_text(lab, result.parameters.get("level")), fontsize=7, color="#0072B2",
                fontweight="bold", ha="center", va="center", zorder=5, path_effects=_HALO)
    edges = " and the edge it drains off" if result.parameters.get("level") == "edges" else ""
    handles.append(Line2D([], [], ls="none", marker="$B$", color="#0072B2", ms=8,
                          label=f"basin label (B + number{edges})"))
    if leaders:  # a mark on the map has its line in the legend
        handles.append(Line2D([], [], color="#0072B2", lw=0.6, label="leader from a basin label to its basin"))
    # below the map (and its axis labels), so no mark is hidden under it and no band is left empty
    fig.legend(handles=handles, loc="outside lower center", ncol=3, fontsize=7, frameon=False)
    ax.set_xlim(left, right)
    ax.set_ylim(bottom, top)
    ax.set_xlabel(frame.xlabel)
    ax.set_ylabel(frame.ylabel)
    ax.set_aspect(frame.aspect)
    map_furniture(fig, ax, dem, frame)
    bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, shrink=_BAR_SHRINK)
    # the bar spans _BAR_SHRINK of the map's box: about the figure's height less 0.5-0.6 in (measured on DEMs of 4-11 in
    # figures); 1 in less keeps the label within it
    bar_in = _BAR_SHRINK * (fig.get_figheight() - 1.0)
    bar.set_label(bar_label(INSTABILITY_WORDS[bool(result.parameters.get("forward_run"))], bar_in),
                  fontsize=_BAR_LABEL_PT)
    ax.set_title("Divide segments by instability; arrows point toward the basin losing ground", fontsize=10)
    return fig


#: Where the map furniture sits, as fractions of the map (x0, y0, x1, y1): the north arrow and its "N" at the
#: top right, the scale bar at the bottom left (divides.report.figures.map_furniture). A basin label there
#: would be hidden or read as part of it.
_FURNITURE = ((0.85, 0.66, 1.0, 1.0), (0.0, 0.0, 0.27, 0.14))


def _under_furniture(fx: float, fy: float) -> bool:
    return any(x0 <= fx <= x1 and y0 <= fy <= y1 for x0, y0, x1, y1 in _FURNITURE)


def _between(line, labels: np.ndarray, label_a: int, label_b: int) -> slice:
    """The vertices of a segment's line drawn on the map: without the one or two at either end that run past a
    junction into a third basin (no cell of either basin within one cell). Drawn in full, those ends of the
    lines meeting at a junction cross each other and read as marks; the layers keep the whole line."""
    r = np.clip(np.rint(np.asarray(line.row)).astype(np.int64), 0, labels.shape[0] - 1)
    c = np.clip(np.rint(np.asarray(line.col)).astype(np.int64), 0, labels.shape[1] - 1)
    seen_a = np.zeros(r.size, dtype=bool)
    seen_b = np.zeros(r.size, dtype=bool)
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            near = labels[np.clip(r + dr, 0, labels.shape[0] - 1), np.clip(c + dc, 0, labels.shape[1] - 1)]
            seen_a |= near == label_a
            seen_b |= near == label_b
    own = seen_a & seen_b
    if np.count_nonzero(own) < 2:
        return slice(None)
    return slice(int(np.argmax(own)), int(own.size - np.argmax(own[::-1])))


def _clear_spot(labels: np.ndarray, lab: int, row: float, col: float, dem, frame, extent,
                box: tuple[slice, slice] | None = None) -> tuple[float, float, tuple[float, float] | None]:
    """Where a basin label goes when its centroid lies under the map furniture (map coordinates).

    The basin's cell nearest its centroid that is clear of the furniture, and no leader; when the
    whole basin is under it, a spot beside the furniture's box, level with the centroid, and the
    centroid for a leader line. Only labels that collide come here, each scanning its own bounding ``box`` (the
    rows and columns of :func:`scipy.ndimage.find_objects`; the whole grid when None).
    """
    left, right, bottom, top = extent
    box = box or (slice(0, labels.shape[0]), slice(0, labels.shape[1]))
    rows, cols = np.nonzero(labels[box] == lab)
    rows, cols = rows + box[0].start, cols + box[1].start
    x, y = (np.asarray(v, dtype=np.float64) * frame.scale for v in dem.xy(rows, cols))
    fx, fy = (x - left) / (right - left), (y - bottom) / (top - bottom)
    clear = ~np.logical_or.reduce([(fx >= x0) & (fx <= x1) & (fy >= y0) & (fy <= y1) for x0, y0, x1, y1 in _FURNITURE])
    if clear.any():
        near = np.flatnonzero(clear)[np.argmin(((rows - row) ** 2 + (cols - col) ** 2)[clear])]
        return float(x[near]), float(y[near]), None
    cx, cy = (float(v) * frame.scale for v in dem.xy(row, col))
    fcx, fcy = (cx - left) / (right - left), (cy - bottom) / (top - bottom)
    box = next(b for b in _FURNITURE if b[0] <= fcx <= b[2] and b[1] <= fcy <= b[3])
    # beside the box, level with the basin: left of the box at the right edge, right of the one at the left
    fx_out = box[0] - 0.04 if box[2] >= 1.0 else box[2] + 0.04
    return left + fx_out * (right - left), cy, (cx, cy)


def _centroids(labels: np.ndarray, block_rows: int = 512) -> list[tuple[int, float, float]]:
    """(label, mean row, mean column) of every label > 0, in one pass over row blocks.

    Sums by ``np.bincount`` are exact integers in float64, so the means equal a mean over
    each label's cells; memory stays at a block, not an index grid per axis.
    """
    top = int(labels.max()) if labels.size else 0
    count = np.zeros(top + 1)
    row_sum = np.zeros(top + 1)
    col_sum = np.zeros(top + 1)
    cols = np.arange(labels.shape[1], dtype=np.float64)
    for r0 in range(0, labels.shape[0], block_rows):
        block = labels[r0: r0 + block_rows]
        flat = block.ravel()
        per_row = np.repeat(np.arange(r0, r0 + block.shape[0], dtype=np.float64), block.shape[1])
        count += np.bincount(flat, minlength=top + 1)
        row_sum += np.bincount(flat, weights=per_row, minlength=top + 1)
        col_sum += np.bincount(flat, weights=np.tile(cols, block.shape[0]), minlength=top + 1)
    return [(int(lab), row_sum[lab] / count[lab], col_sum[lab] / count[lab]) for lab in np.flatnonzero(count)
            if lab > 0]


def _parameter_table(params: dict) -> str:
    rows = []
    for key, value in params.items():
        name, unit = parameter_label(key)
        rows.append([_html._e(name), _html._e(parameter_value(value)), _html._e(unit),
                     f"<code>{_html._e(key)}</code>"])
    return _html._table(["Parameter", "Value", "Unit", "Key in screening.json"], rows, numeric={1})


def _follow_up(result: Screening, sides: dict[int, str], document: dict) -> str:
    """The report's section with the ``divides assess`` command of the segments to assess first."""
    e = _html._e
    prov = document.get("provenance") or {}
    level = result.parameters.get("level")
    rows = [[str(s["rank"]), f"{basin_text(s['basins'][0], level)} | {basin_text(s['basins'][1], level)}",
             f"<code>{e(assess_command(result, s, sides, dem_file=prov.get('dem_file'), command=prov.get('command')))}"
             "</code>"] for s in follow_up_segments(result.segments) if all(int(b) in sides for b in s["basins"])]
    if not rows:
        return ""
    what = ("its two basins' edges as the sides: a side is all the land draining off its edge" if level == "edges"
            else "the rivers on either side of the stretch of divide the segment was judged on as the sides, each "
            "river by the point at its mouth in the DEM's CRS (each basin's river is in segments.csv as side_1 and "
            "side_2), snapped no further than half a cell")
    return ("<h2>Following up</h2><p>To assess a segment's divide in full, run <code>divides assess</code> with "
            f"{what}, and the options this screening read the DEM and judged with. The assessment reads the whole "
            "divide between those rivers, so it can be more or less certain than the segment's verdict (on fresh "
            "held-out model landscapes it gave the segment's direction in 821 of 1010 follow-ups, none the other, "
            "but also confirmed 43 of 72 main segments in still stretches: verify in the field; docs/validation.md). "
            "Segments with a direction first:</p>"
            + _html._table(["rank", "basins", "command"], rows, numeric={0}))


def _report(result: Screening, png: bytes, rows: list[dict], document: dict, sides: dict[int, str],
            top: int = MAP_RANKS) -> str:
    e = _html._e

    def name(label: int) -> str:
        return basin_text(label, result.parameters.get("level"))

    header = ["rank", "instability", "P(moving)", "confidence", "length (m)", "basins", "divide",
              "moves toward basin", "bearing (°)", "basis"]
    table = _html._table(header, [[str(r["rank"]), e(probability_text(r["instability"])),  # "<0.01" is escaped
                                   e(probability_text(r["motion_probability"])), e(confidence_text(r)),
                                   f"{r['length_m']:,.0f}", f"{name(r['basin_1'])} | {name(r['basin_2'])}",
                                   e(_KIND_WORDS.get(r["divide_kind"], str(r["divide_kind"]))),
                                   "—" if r["moves_toward_basin"] is None else name(r["moves_toward_basin"])
                                   + ("" if likely_motion(seg) else " (motion unlikely)"),
                                   "—" if r["motion_azimuth_deg"] is None else f"{r['motion_azimuth_deg']:.0f}",
                                   e(r["basis"])]  # the segment's unrounded probability decides, as on the map
                                  for r, seg in zip(rows[:top], result.segments)], numeric={0, 1, 2, 3, 4, 8})
    p = result.parameters
    words = INSTABILITY_WORDS[bool(p.get("forward_run"))] + (
        "; P(moving): the calibrated probability that it moves" if p.get("forward_run") else "") + (
        "; " + SMALL_SCORE_NOTE.split(";")[0] if any(small_score(s) for s in result.segments[:top]) else "")
    notes = [*runs_notes(result), *data_notes(result)]
    caution = (f"<div class=\"caution\" role=\"note\"><b>Caution.</b> {e(CAUTION)}"
               + "".join(f" {e(n)}" for n in notes if n is not None) + "</div>")
    lead = (f"{len(rows)} divide segments between {result.n_basins} basins of at least "
            f"{p['min_basin_area_m2'] / 1e6:.3g} km² ({e(p['level'])}); {e(directions_text(result.segments))}.")
    cov = result.coverage or {}
    share = cov.get("share")
    coverage = ("<p>Coverage: " + ("no divide between outlet basins" if share is None else
                f"{100 * share:.0f} % of the {cov['outlet_divides_length_m'] / 1000:,.1f} km of divide between "
                "outlet basins lies in judged segments") + f"; {len(result.gaps)} stretches were left out "
                "(layers/screen_gaps.geojson), by reason, below. The screened basins cover "
                f"{100 * cov.get('screened_area_share', 1.0):.0f} % {area_of(p)}; the divides beside smaller basins "
                "are gaps.</p>")
    gap_table = _html._table(["reason", "length (km)"], [[e(k), f"{v / 1000:,.2f}"] for k, v in
                                                           cov.get("gap_length_by_reason_m", {}).items()],
                             numeric={1})
    methods = (
        "<h2>Methods and references</h2><p>Basins above the minimum area are labelled (level "
        f"{e(p['level'])}); every divide between two of them is traced and cut into segments of at most "
        f"{p['max_segment_m'] / 1000:.3g} km. Each segment is judged by the same calibrated decision as "
        "<code>divides assess</code>: across-divide contrasts of channel elevation, hillslope gradient, local "
        "and hillslope relief (Forte &amp; Whipple 2018; Scherler &amp; Schwanghart 2020) and χ from the pair's "
        "common base level (Willett et al. 2014), turned into P(toward either basin) and P(stable); a "
        f"direction needs a probability of at least {p['min_confidence']:g}, otherwise the verdict is "
        "undetermined; on a lateral divide (basins that drain the same way) also where P(moving) is under "
        f"{LIKELY_MOTION:g}: there the decision, fitted on divides between basins that drain apart, named a side on "
        "many divides of model landscapes measured still. A segment shorter than "
        f"{p.get('min_judged_m', 0.0) / 1000:.3g} km is judged on the samples of the divides of other pairs of "
        "basins that continue it, pooled up to that length (pieces of one divide cut at the maximum length are "
        "judged alone). <b>Instability</b> is P(toward a) + P(toward b) rescaled "
        "(Platt 1999) to how often divide segments of regional model landscapes with that probability lay in "
        "stretches that moved: the calibrated probability that the segment moves; it is unknown when too few "
        "independent samples were found. Divides between tributaries of the same trunk are not assessed. "
        + ("Two lines of landscape evidence join it: two forward runs of the landscape-evolution model over the "
           "whole DEM (0.3 response times, erodibility unknown, hillslope diffusivity and uplift fitted so the "
           "present surface is the model's steady state, one uplift rate for the DEM and one per outlet basin, "
           f"slope exponent n = {float(p.get('n', 1.0)):g}; "
           "Perron et al. 2009) move each segment by the area its two basins exchange next to it, and the "
           "curvature of the hilltops next to it, fitted over the DEM error's correlation length, says which "
           "side lowers faster (E = −D ∇²z; Roering et al. 2007; Hurst et al. 2012). The instability then reads "
           "whether both runs move the segment at least half a model cell (the first three quarters of one on a "
           "main divide) the way the near-divide measures point (on a main divide whose eroding basin is out of "
           "steady state, its lower channels eroding unlike its upper ones beyond what the DEM error explains, "
           "whether the first does and the second does not move it as far the other way: the second takes a "
           "fall of base level for steady uplift), and, on main "
           "divides, whether the hilltops agree; on lateral divides, hilltops against the direction keep the "
           "score below 0.5 (Gilbert 1877; Royden &amp; Perron 2013; Whipple &amp; Tucker 1999). With this "
           "evidence the segments rank by a score (ranking_score in segments.csv), not a calibrated probability: "
           "a segment the runs do not move gets little even when it moves (its reliability on held-out model "
           "landscapes is in docs/validation.md; every such landscape eroded with n = 1, and where n = 2 "
           "divides moving under a tilted uplift were under-scored). The instability is that score, never above "
           "P(moving), so an "
           "instability of 0.5 or more means both read the segment as more likely moving than not. "
           "<b>P(moving)</b>, beside it, "
           "is the calibrated probability that the segment moves: a logistic model of the same evidence, the "
           "size of the runs' shift, whether a strongly scored main segment lies next to it and the DEM error "
           "the screening is told (read up to 5 m), fitted on "
           "the training cases of the regional model landscapes (Platt 1999); on held-out ones its calibration "
           "error was 0.01–0.07 per model landscape draw without DEM error and up to 0.08 with 5 m. It is "
           "calibrated to their "
           "mix, in which 37 % of the segments of main divides move: where moving divides are rarer it reads high, and "
           "still divides whose evidence looks like that of moving ones can get 0.5 or more, so the ranking and "
           "the instability, not P(moving), say where to look first. Of the segments scored 0.01 or "
           "more (and those with P(moving) of 0.5 or more that neither landscape run measured or, where the "
           "screening is told a DEM error of 3 m or more, any), those the decision gives a direction rank first; "
           "where it is told 3 m or more, those without one rank with the segments scored below 0.01. "
           "Segments scored below 0.01 "
           f"rank after the rest: on main divides, those within {NEIGHBOUR_CELLS:g} cells of a main segment "
           f"scored {NEIGHBOUR_SCORE:g} or more, or linked to one by a chain of weak segments that a run moves "
           f"{CHAIN_CELLS:g} model cell or more, "
           "first (a divide moves along a stretch several segments long); each group furthest moved by either "
           "run, either way, first (those neither could measure before all; moves under half a model cell, "
           "within what resampling the DEM changes, count as none); "
           "segments of unknown instability that the runs move join them. Main and lateral divides are each "
           "ranked so and, unless the screening is told a DEM error of 3 m or more, merged by P(moving), so "
           "that a main divide likely to move does not rank below lateral ones unlikely to. "
           if p.get("forward_run")
           else "") +
        f"{SCREENING_LIMITS} "
        "Details: docs/methods.md §7b; figures: docs/validation.md (Regional screening).</p>"
        "<h3>References</h3><ol>" + "".join(f"<li>{e(r)}</li>" for r in SCREENING_REFERENCES) + "</ol>")
    body = "".join([
        "<h1>Regional divide screening</h1>",
        f"<p class=\"sub\">DEM {e(document['dem']['path'] or '(in memory)')} · "
        f"{e(document['dem']['crs'] or 'no CRS')} · "
        f"report of {e(_dt.datetime.now(_dt.timezone.utc).date().isoformat())}</p>",
        caution,
        f"<section class=\"verdict\" id=\"verdict\"><p class=\"lead\">{lead}</p>"
        f"<p>{e(words[:1].upper() + words[1:])}. "
        "A screening ranks where to look first, it does not replace an assessment of each divide "
        "(<code>divides assess</code>) and field work.</p>" + coverage + gap_table + "</section>",
        "<figure><img alt=\"regional map\" src=\"data:image/png;base64,"
        + base64.b64encode(png).decode("ascii") + "\"><figcaption>Divide segments coloured by instability "
        "(plasma: colour-blind safe, dark to bright); circled numbers are the ranks of the table below, "
        "B-numbers the basins; arrows point toward the basin losing ground (grey where the probability of motion is "
        f"under {LIKELY_MOTION:g}: a direction the near-divide measures favour, not a likely motion); dotted lines "
        "were not assessed. "
        "<span class=\"note\">(files: figures/regional_map.png, figures/regional_map.svg)</span>"
        "</figcaption></figure>",
        f"<h2>The {min(top, len(rows))} least stable segments</h2>", table,
        _follow_up(result, sides, document),
        methods, "<h2>Parameters</h2>", _parameter_table(p),
        "<h2>Caution</h2>", caution,
        f"<footer id=\"provenance\"><p>{e(provenance_line(document.get('provenance') or {}))}</p></footer>",
    ])
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>Regional divide "
            f"screening</title><style>{_html._CSS}</style></head><body><main>{body}</main></body></html>\n")


def write_screening(result: Screening, out_dir, *, overwrite: bool = False, command: list[str] | None = None,
                    cli: bool = False, sides: dict[int, str] | None = None) -> Path:
    """Write a screening's outputs into ``out_dir`` atomically (see :func:`divides.report.writer.staged_output`).

    ``screening.json`` and the ``summary.json`` marker carry ``provenance``
    (see :func:`divides.report.provenance.provenance`; ``command`` as run on
    the command line, None from Python); no output holds a folder path.
    ``cli`` makes errors name ``--out``/``--overwrite``. ``sides``: the
    :func:`divides.report.follow_up.basin_sides` of ``result`` where the
    caller has them already (computed here otherwise).
    """
    sides = basin_sides(result) if sides is None else sides
    rows = segment_rows(result, sides)
    prov = _provenance(result.dem.path, command=command)
    document = public_summary(result.to_dict(), prov)
    document["basin_sides"] = {str(k): v for k, v in sides.items()}
    with staged_output(out_dir, overwrite=overwrite, cli=cli) as tmp:
        write_json(tmp / "screening.json", document)
        if result.dem.crs is not None:
            write_feature_collection(tmp / "segments.geojson", segment_features(result, rows))
            write_feature_collection(tmp / "layers" / "screen_gaps.geojson", _iter_gap_features(result),
                                     parents=True)
            holes = filled_void_features(result.dem, result.voids)
            if holes:  # only where holes of nodata were filled
                write_feature_collection(tmp / "layers" / "filled_voids.geojson", holes)
        write_text(tmp / "segments.csv", csv_text(rows, _COLUMNS))
        fig = regional_map(result)
        png = to_png(fig)
        with atomic_write(tmp / "figures" / "regional_map.png", parents=True) as f:
            f.write_bytes(png)
        with atomic_write(tmp / "figures" / "regional_map.svg", parents=True) as f:
            f.write_bytes(_figures.to_svg(fig))
        write_text(tmp / "report.html", _report(result, png, rows, document, sides))
        # marks the folder as a divides output, so --overwrite may replace it later
        write_json(tmp / "summary.json", {"schema": "divides.screening/1", "provenance": prov,
                                          "n_segments": len(rows), "coverage": document.get("coverage")})
    return Path(os.path.abspath(os.fspath(out_dir)))
