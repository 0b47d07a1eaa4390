"""Plain names and units for the parameters shown in reports.

Keys of ``summary.json`` are for programs (``a0_m2``, ``n_bootstrap``); a
reader of a report gets a name in words, the value and its unit. Keys not
listed here (added later) are named from their spelling: ``_m2`` means m²,
``_m`` metres, ``_mm_yr`` mm/yr, ``_years`` years.
"""

from __future__ import annotations

from typing import Any

__all__ = ["PARAMETER_LABELS", "parameter_label", "parameter_value", "CONDITIONING_LABELS", "probability_text"]

#: Parameter key -> (plain name, unit; "" for none).
PARAMETER_LABELS: dict[str, tuple[str, str]] = {
    "theta": ("Concavity θ (m/n) asked for", ""),
    "n": ("Slope exponent n of the stream-power law", ""),
    "a0_m2": ("Reference drainage area A₀ of χ", "m²"),
    "channel_area_m2": ("Channel threshold area asked for", "m²"),
    "reference_area_m2": ("Area at which near-divide measures are read, asked for", "m²"),
    "base_level_m": ("Common base level asked for", "m"),
    "dem_error_m": ("Vertical error of the DEM (1 σ)", "m"),
    "relief_radius_m": ("Radius of the local-relief window", "m"),
    "divide_spacing_m": ("Spacing of divide sample points asked for", "m"),
    "block_m": ("Block length of the bootstrap along the divide", "m"),
    "n_bootstrap": ("Bootstrap resamples per measure", ""),
    "robustness": ("Re-runs with perturbed DEM, θ and threshold", ""),
    "n_noise_runs": ("Re-runs with DEM noise", ""),
    "forward_run": ("Forward run of the model as evidence", ""),
    "forward_in_decision": ("Decision reads the forward run", ""),
    "erosion_rate_a_mm_yr": ("Erosion rate given for side a", "mm/yr"),
    "erosion_rate_b_mm_yr": ("Erosion rate given for side b", "mm/yr"),
    "erodibility": ("Erodibility K given", "m^(1−2θ)/yr (n = 1)"),
    "knickpoint_age_years": ("Knickpoint age given", "years"),
    "sea_level_m": ("Sea level (cells at or below drain off the DEM)", "m"),
    "conditioning": ("Depression handling", ""),
    "voids": ("Nodata holes inside the DEM (fill: interpolated; outlets: drained into)", ""),
    "closed_edges": ("DEM edges closed to flow", ""),
    "snap_radius_m": ("Snapping radius of side points", "m"),
    "seed": ("Random seed", ""),
    "name_a": ("Name of side a", ""),
    "name_b": ("Name of side b", ""),
    "theta_used": ("Concavity θ used", ""),
    "theta_source": ("Where θ came from", ""),
    "channel_area_used_m2": ("Channel threshold area used", "m²"),
    "channel_area_source": ("Where the channel threshold came from", ""),
    "channel_area_reason": ("Why this channel threshold", ""),
    "reference_area_used_m2": ("Area at which near-divide measures are read", "m²"),
    "base_level_used_m": ("Common base level used", "m"),
    "base_level_source": ("Where the base level came from", ""),
    "divide_spacing_used_m": ("Spacing of divide sample points", "m"),
    "block_points": ("Bootstrap block length", "sample points"),
    "lonlat": ("Side points given as longitude, latitude", ""),
    "weights": ("Weights of χ (runoff, erodibility, uplift rasters)", ""),
    "chi_weighted": ("χ weighted by rasters", ""),
    "raster_holes_cells": ("DEM cells where a weighting raster has no value (read as its typical value)", "cells"),
    "min_basin_area_m2": ("Smallest basin screened", "m²"),
    "level": ("Basins compared", ""),
    "max_segment_m": ("Longest divide segment", "m"),
    "min_judged_m": ("Shorter segments judged with the segments continuing them, up to", "m"),
    "workers": ("Processes used", ""),
}

#: Keys of the conditioning summary -> (plain name, unit).
CONDITIONING_LABELS: dict[str, tuple[str, str]] = {
    "method": ("method", ""),
    "filled_cells": ("cells filled", ""),
    "filled_area_m2": ("area filled", "m²"),
    "filled_volume_m3": ("volume filled", "m³"),
    "carved_cells": ("cells carved", ""),
    "carved_volume_m3": ("volume carved", "m³"),
    "n_outlet_cells": ("outlet cells", ""),
}

_SUFFIXES = (("_mm_yr", "mm/yr"), ("_m2", "m²"), ("_m3", "m³"), ("_km2", "km²"), ("_m", "m"),
             ("_years", "years"), ("_deg", "°"))


def parameter_label(key: str, labels: dict[str, tuple[str, str]] | None = None) -> tuple[str, str]:
    """(plain name, unit) of a parameter key.

    Examples
    --------
    >>> parameter_label("a0_m2")
    ('Reference drainage area A₀ of χ', 'm²')
    >>> parameter_label("hillslope_length_m")
    ('Hillslope length', 'm')
    """
    table = PARAMETER_LABELS if labels is None else labels
    if key in table:
        return table[key]
    for suffix, unit in _SUFFIXES:
        if key.endswith(suffix):
            stem = key[: -len(suffix)]
            break
    else:
        stem, unit = key, ""
    words = stem.replace("_", " ").strip()
    return (words[:1].upper() + words[1:]) or key, unit


def parameter_value(value: Any) -> str:
    """A value in words: numbers to 4 significant digits, yes/no, lists joined, dicts as "name: value".

    Large numbers are written out with thousands separators (an area of 2,426,000 m², not 2.426e+06);
    small ones keep the exponent (an erodibility of 1e-05).

    Examples
    --------
    >>> [parameter_value(v) for v in (2425780.2, 0.45, 1e-5, 3698.0, True, None)]
    ['2,426,000', '0.45', '1e-05', '3698', 'yes', '— (not given)']
    """
    if value is None:
        return "— (not given)"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        text = f"{value:.4g}"
        return f"{float(text):,.0f}" if "e+" in text else text
    if isinstance(value, dict):
        parts = []
        for k, v in value.items():
            name, unit = parameter_label(k, CONDITIONING_LABELS)
            parts.append(f"{name[:1].lower() + name[1:]}: {parameter_value(v)}{' ' + unit if unit and v is not None else ''}")
        return "; ".join(parts) or "none"
    if isinstance(value, (list, tuple)):
        return ", ".join(parameter_value(v) for v in value) or "none"
    return str(value)


def probability_text(p: float | None) -> str:
    """A probability to two decimals, never shown as certain: ">0.99" and "<0.01" at the ends, "unknown" for None.

    Examples
    --------
    >>> [probability_text(v) for v in (0.99981, 0.5, 0.0004, None)]
    ['>0.99', '0.50', '<0.01', 'unknown']
    """
    if p is None:
        return "unknown"
    if p >= 0.995:
        return ">0.99"
    if p < 0.005:
        return "<0.01"
    return f"{p:.2f}"
