"""GIS outputs of an assessment: GeoJSON layers (RFC 7946), rasters on the DEM grid, CSV tables.

GeoJSON positions are longitude, latitude on WGS 84 (RFC 7946 §4), rounded
to :data:`DECIMALS` places (about 1 cm), with no ``crs`` member. A DEM
without a CRS cannot be placed on the globe, so it gets no GeoJSON layers;
its rasters and tables are still written (in grid coordinates).
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from divides.assess.points import METRICS
from divides.assess.verdict import NEAR_DIVIDE_METRICS
from divides.io.writing import write_json, write_raster, write_text

if TYPE_CHECKING:  # pragma: no cover - imports for type hints only
    from divides.assess.assessment import Assessment
    from divides.io.dem import Dem

__all__ = [
    "DECIMALS",
    "SIDE_NODATA",
    "motion_index",
    "side_labels",
    "raster_layers",
    "channel_features",
    "divide_point_features",
    "divide_line_features",
    "knickpoint_features",
    "equilibrium_features",
    "filled_void_features",
    "geojson_layers",
    "tables",
    "csv_text",
    "write_layers",
    "write_rasters",
    "write_tables",
]

#: Decimal places of longitude/latitude: 1e-7 degree is about 1 cm on the ground.
DECIMALS = 7

#: Value of DEM nodata cells in the side-label raster (0/1/2 are neither/a/b).
SIDE_NODATA = 255


# ---------------------------------------------------------------- shared data
def motion_index(result: Assessment) -> np.ndarray:
    """Local evidence of divide motion at each divide point, from -1 (into side a) to +1 (into side b).

    For each near-divide metric with values on both sides, the difference is
    taken in the sense that favours motion into side b (b − a for metrics
    whose higher side loses ground, a − b for the others), divided by the
    mean size of the two values (channel elevation measured above the common
    base level). The index is the mean over the available metrics, clipped to
    ±1; NaN where no metric is available. It maps where along the divide the
    evidence is strong; the verdict itself rests on the bootstrapped contrasts.
    """
    points = result.points
    total = np.zeros(points.size)
    count = np.zeros(points.size)
    for name in NEAR_DIVIDE_METRICS:
        if name not in points.values:
            continue
        va, vb = (np.asarray(v, dtype=np.float64) for v in points.values[name])
        if name == "channel_elevation":
            va, vb = va - result.base.elevation_m, vb - result.base.elevation_m
        toward_b = (vb - va) if METRICS[name][1] == "higher" else (va - vb)
        scale = 0.5 * (np.abs(va) + np.abs(vb))
        with np.errstate(invalid="ignore", divide="ignore"):
            # equal zero values on both sides are no evidence either way; missing values are missing
            rel = np.where(scale > 0, toward_b / scale, np.where(np.isfinite(scale), 0.0, np.nan))
        ok = np.isfinite(rel)
        total[ok] += rel[ok]
        count[ok] += 1
    with np.errstate(invalid="ignore", divide="ignore"):
        index = total / count
    return np.clip(index, -1.0, 1.0)


def side_labels(result: Assessment) -> np.ndarray:
    """Side of every DEM cell: 1 side a, 2 side b, 0 neither, :data:`SIDE_NODATA` on DEM nodata."""
    labels = np.zeros(result.dem.shape, dtype=np.uint8)
    labels[result.sides.a.mask] = 1
    labels[result.sides.b.mask] = 2
    labels[~result.dem.valid] = SIDE_NODATA
    return labels


def raster_layers(result: Assessment) -> dict[str, tuple[np.ndarray, dict]]:
    """The rasters written to ``rasters/``: name -> (array on the DEM grid, writing options)."""
    profiles = result.profiles
    return {
        "chi": (profiles.grid(profiles.chi).astype(np.float32),
                {"description": f"chi (m) from the common base level, theta = {profiles.theta:.3g}"}),
        "ksn": (profiles.grid(profiles.ksn).astype(np.float32),
                {"description": "normalised channel steepness ksn (m^(2 theta)) of each chi-z segment"}),
        "sides": (side_labels(result),
                  {"nodata": SIDE_NODATA, "description": "0 neither side, 1 side a, 2 side b"}),
    }


def _finite(value: Any) -> Any:
    """Plain Python value with NaN/inf (and numpy scalars) made JSON- and CSV-ready."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _lonlat(dem: Dem, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Longitude in [-180, 180) and latitude, rounded to :data:`DECIMALS` places."""
    lon, lat = dem.to_lonlat(np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64))
    lon = (np.asarray(lon) + 180.0) % 360.0 - 180.0  # RFC 7946 §4: longitudes within ±180
    return np.round(lon, DECIMALS), np.round(np.asarray(lat), DECIMALS)


def _cell_xy(dem: Dem, cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    rows, cols = np.divmod(np.asarray(cells, dtype=np.int64), dem.shape[1])
    return dem.xy(rows, cols)


def _feature(geometry: dict, properties: dict) -> dict:
    return {"type": "Feature", "geometry": geometry,
            "properties": {k: _finite(v) for k, v in properties.items()}}


def _collection(features: list[dict]) -> dict:
    return {"type": "FeatureCollection", "features": features}


def _side_name(code: int) -> str | None:
    return {1: "a", 2: "b"}.get(int(code))


# ---------------------------------------------------------------- channels
def _link_paths(result: Assessment) -> list[tuple[int, np.ndarray, np.ndarray]]:
    """Each analysed channel link: (link id, its own positions top first, the same plus the cell below)."""
    profiles = result.profiles
    channels = result.channels
    kept = np.flatnonzero(profiles.side > 0)
    if kept.size == 0:
        return []
    link = channels.link[kept]
    # positions grow upstream along a path (each cell comes after its receiver)
    order = np.lexsort((-kept, link))
    kept, link = kept[order], link[order]
    starts = np.flatnonzero(np.r_[True, link[1:] != link[:-1]])
    ends = np.r_[starts[1:], kept.size]
    paths = []
    for s, e in zip(starts, ends):
        own = kept[s:e]
        below = channels.down[own[-1]]
        # join the link to the one it flows into, so the lines connect
        nodes = np.r_[own, below] if below >= 0 else own
        if nodes.size >= 2:
            paths.append((int(link[s]), own, nodes))
    return paths


def channel_features(result: Assessment) -> list[dict]:
    """One LineString per channel link on either side, with χ, ksn, area and side.

    Lines run downstream (from the link's top to the first cell of the link
    below it, so that links join); ``area_m2`` is the largest drainage area
    of the link and ``ksn`` the median over its cells.
    """
    dem = result.dem
    channels = result.channels
    profiles = result.profiles
    paths = _link_paths(result)
    if not paths:
        return []
    every = np.concatenate([nodes for _, _, nodes in paths])
    lon, lat = _lonlat(dem, *_cell_xy(dem, channels.cells[every]))
    features = []
    at = 0
    for link_id, own, nodes in paths:
        n = nodes.size
        coords = np.column_stack([lon[at:at + n], lat[at:at + n]]).tolist()
        at += n
        chi = profiles.chi[own]
        ksn = profiles.ksn[own]
        finite_chi = chi[np.isfinite(chi)]
        finite_ksn = ksn[np.isfinite(ksn)]
        features.append(_feature(
            {"type": "LineString", "coordinates": coords},
            {
                "link": link_id,
                "side": _side_name(profiles.side[nodes[0]]),
                "strahler": int(channels.strahler[nodes[0]]),
                "length_m": float(channels.distance_upstream[nodes[0]] - channels.distance_upstream[nodes[-1]]),
                "area_m2": float(channels.area[own].max()),
                "chi_top_m": float(finite_chi.max()) if finite_chi.size else None,
                "chi_bottom_m": float(finite_chi.min()) if finite_chi.size else None,
                "ksn": float(np.median(finite_ksn)) if finite_ksn.size else None,
                "elevation_top_m": float(channels.elevation[nodes[0]]),
                "elevation_bottom_m": float(channels.elevation[nodes[-1]]),
            },
        ))
    return features


# ---------------------------------------------------------------- divide
def _point_rows(result: Assessment) -> list[dict]:
    """One dict per divide point: position, normal, every metric's a/b/difference, motion index."""
    points = result.points
    index = motion_index(result)
    shift = result.equilibrium.shift_m
    rows = []
    for i in range(points.size):
        row = {
            "point": i,
            "line": int(points.line[i]),
            "distance_m": float(points.distance_m[i]),
            "x": float(points.x[i]),
            "y": float(points.y[i]),
            "elevation_m": float(points.elevation_m[i]),
            "normal_east": float(points.normal[i, 0]),
            "normal_north": float(points.normal[i, 1]),
            "motion_index": float(index[i]),
            "equilibrium_shift_m": float(shift[i]) if i < shift.size else None,
        }
        for name, (va, vb) in points.values.items():
            row[f"{name}_a"] = float(va[i])
            row[f"{name}_b"] = float(vb[i])
            row[f"{name}_difference"] = float(va[i] - vb[i])
        rows.append(row)
    return rows


def divide_point_features(result: Assessment) -> list[dict]:
    """One Point per divide sample with each metric's side-a and side-b values and difference (a − b)."""
    rows = _point_rows(result)
    if not rows:
        return []
    lon, lat = _lonlat(result.dem, result.points.x, result.points.y)
    return [_feature({"type": "Point", "coordinates": [float(lon[i]), float(lat[i])]}, row)
            for i, row in enumerate(rows)]


def divide_line_features(result: Assessment) -> list[dict]:
    """One LineString per divide line (side a on the left walking along it)."""
    features = []
    for i, line in enumerate(result.divide.lines):
        if line.x.size < 2:
            continue
        lon, lat = _lonlat(result.dem, line.x, line.y)
        features.append(_feature(
            {"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()},
            {"line": i, "length_m": line.length_m,
             "elevation_min_m": float(np.nanmin(line.elevation_m)),
             "elevation_max_m": float(np.nanmax(line.elevation_m))},
        ))
    return features


def _knickpoint_rows(result: Assessment) -> list[dict]:
    rows = []
    for i, kp in enumerate(result.knickpoints):
        arrival = kp.get("arrival_years") or {}
        rows.append({
            "knickpoint": i,
            "side": kp["side"],
            "kind": kp.get("kind"),
            "x": float(kp["x"]),
            "y": float(kp["y"]),
            "elevation_m": float(kp["elevation_m"]),
            "distance_to_divide_m": float(kp["distance_to_divide_m"]),
            "area_m2": float(kp.get("area_m2", math.nan)),
            "chi_m": float(kp.get("chi", math.nan)),
            "chi_base_m": float(kp.get("chi_base", math.nan)),  # NaN (null) below the common base level
            "delta_ksn": float(kp.get("delta_ksn", math.nan)),
            "step_m": float(kp.get("step_m", math.nan)),
            "p_value": float(kp.get("p_value", math.nan)),
            "q_value": float(kp.get("q_value", math.nan)),
            "celerity_defined": bool(kp["celerity_defined"]) if "celerity_defined" in kp else None,
            "celerity_note": kp.get("celerity_note"),
            "arrival_years_low": arrival.get("low"),
            "arrival_years_best": arrival.get("best"),
            "arrival_years_high": arrival.get("high"),
        })
    return rows


def knickpoint_features(result: Assessment) -> list[dict]:
    """One Point per significant knickpoint, with its arrival times at the channel head (years)."""
    rows = _knickpoint_rows(result)
    if not rows:
        return []
    lon, lat = _lonlat(result.dem, [r["x"] for r in rows], [r["y"] for r in rows])
    return [_feature({"type": "Point", "coordinates": [float(lon[i]), float(lat[i])]}, row)
            for i, row in enumerate(rows)]


def equilibrium_features(result: Assessment) -> list[dict]:
    """One LineString per divide line through the equilibrium positions of its points.

    Points without an equilibrium estimate are left out; a line needs two.
    """
    eq = result.equilibrium
    ok = np.isfinite(eq.shift_m) & np.isfinite(eq.x) & np.isfinite(eq.y)
    features = []
    for line in np.unique(eq.line[ok]):
        sel = ok & (eq.line == line)
        if np.count_nonzero(sel) < 2:
            continue
        lon, lat = _lonlat(result.dem, eq.x[sel], eq.y[sel])
        features.append(_feature(
            {"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()},
            {"line": int(line), "n_points": int(np.count_nonzero(sel)),
             "median_shift_m": float(np.median(eq.shift_m[sel])),
             "note": "first-order estimate: trust its direction and order of magnitude, not metres"},
        ))
    return features


def filled_void_features(dem: Dem, voids) -> list[dict]:
    """RFC 7946 Polygons (WGS 84 lon/lat) of the holes of nodata filled by interpolation, one per hole (8-connected):
    ``hole``, ``cells``, ``area_m2``; empty when none was filled (``voids``: a
    :class:`divides.terrain.voids.VoidFill`)."""
    filled = voids.filled
    if filled is None or not filled.any():
        return []
    from rasterio.features import shapes
    from scipy import ndimage

    labels, n = ndimage.label(filled, structure=np.ones((3, 3), dtype=bool))
    cells = np.bincount(labels.ravel(), minlength=n + 1)
    rows = np.nonzero(filled)[0]
    area = np.bincount(labels[filled], weights=dem.cell_area[rows], minlength=n + 1)
    rings_of: dict[int, list] = {}
    for geometry, value in shapes(labels.astype(np.int32), mask=filled, connectivity=8, transform=dem.transform):
        rings = []
        for k, ring in enumerate(geometry["coordinates"]):
            xy = np.asarray(ring, dtype=np.float64)
            lon, lat = _lonlat(dem, xy[:, 0], xy[:, 1])
            # RFC 7946 §3.1.6: exterior rings counterclockwise, holes clockwise (shoelace sign)
            ccw = float(np.sum(lon[:-1] * lat[1:] - lon[1:] * lat[:-1])) > 0
            step = 1 if ccw == (k == 0) else -1
            rings.append(np.column_stack([lon, lat])[::step].tolist())
        rings_of.setdefault(int(value), []).append(rings)
    features = []
    for hole in sorted(rings_of):
        polygons = rings_of[hole]
        geometry = ({"type": "Polygon", "coordinates": polygons[0]} if len(polygons) == 1
                    else {"type": "MultiPolygon", "coordinates": polygons})
        features.append(_feature(geometry, {"hole": hole, "cells": int(cells[hole]),
                                            "area_m2": round(float(area[hole]), 1)}))
    return features


def geojson_layers(result: Assessment) -> dict[str, dict]:
    """Every GeoJSON layer as a FeatureCollection (empty dict when the DEM has no CRS)."""
    if result.dem.crs is None:
        return {}
    layers = {
        "channels": _collection(channel_features(result)),
        "divide_points": _collection(divide_point_features(result)),
        "divide_lines": _collection(divide_line_features(result)),
        "knickpoints": _collection(knickpoint_features(result)),
        "equilibrium_divide": _collection(equilibrium_features(result)),
    }
    holes = filled_void_features(result.dem, result.voids)
    if holes:  # only where holes of nodata were filled
        layers["filled_voids"] = _collection(holes)
    _name_sides(result, layers)
    return layers


def _name_sides(result: Assessment, layers: dict[str, dict]) -> None:
    """Beside every ``side`` property ("a"/"b"), the side's name (``--name-a``/``name_a=``, else "side a")."""
    names = {k: getattr(result.config, f"name_{k}", None) or f"side {k}" for k in ("a", "b")}
    for collection in layers.values():
        for feature in collection["features"]:
            props = feature["properties"]
            if props.get("side") in names:
                props["side_name"] = names[props["side"]]


# ---------------------------------------------------------------- tables
def _stream_rows(result: Assessment) -> list[dict]:
    profiles = result.profiles
    channels = result.channels
    dem = result.dem
    kp_count: dict[int, int] = {}
    for kp in result.knickpoints:
        kp_count[int(kp["position"])] = kp_count.get(int(kp["position"]), 0) + 1
    rows = []
    for i, s in enumerate(profiles.streams):
        nodes = s.nodes
        bx, by = _cell_xy(dem, channels.cells[nodes[[0, -1]]])
        ksn = profiles.ksn[nodes]
        ksn = ksn[np.isfinite(ksn)]
        chi = profiles.chi[nodes]
        rows.append({
            "stream": i,
            "side": s.side,
            "n_cells": int(nodes.size),
            "length_m": float(channels.distance_upstream[nodes[-1]] - channels.distance_upstream[nodes[0]]),
            "bottom_x": float(bx[0]), "bottom_y": float(by[0]),
            "top_x": float(bx[1]), "top_y": float(by[1]),
            "bottom_elevation_m": float(channels.elevation[nodes[0]]),
            "top_elevation_m": float(channels.elevation[nodes[-1]]),
            "area_bottom_m2": float(channels.area[nodes[0]]),
            "chi_top_m": float(np.nanmax(chi)) if np.isfinite(chi).any() else None,
            "n_segments": int(s.segmentation.n_segments),
            "ksn_median": float(np.median(ksn)) if ksn.size else None,
            "n_knickpoints": int(sum(kp_count.get(int(p), 0) for p in nodes)),
        })
    return rows


def tables(result: Assessment) -> dict[str, list[dict]]:
    """The CSV tables: name -> rows (dicts with the same keys)."""
    contrasts = []
    for c in result.contrasts:
        d = c.to_dict()
        contrasts.append({"metric": d["metric"], "unit": d["unit"], "a": d["a"], "b": d["b"],
                          "difference": d["difference"], "ci95_low": d["ci95"][0], "ci95_high": d["ci95"][1],
                          "moves_toward": d["moves_toward"], "n_points": d["n_points"], "rule": d["rule"]})
    knickpoints = _knickpoint_rows(result)
    points = _point_rows(result)
    if result.dem.crs is not None:
        for rows in (points, knickpoints):
            if rows:
                lon, lat = _lonlat(result.dem, [r["x"] for r in rows], [r["y"] for r in rows])
                for i, (lo, la) in enumerate(zip(lon, lat)):
                    rows[i] = _insert_after(rows[i], "y", {"lon": float(lo), "lat": float(la)})
    robustness = [{"change": r.get("change"), "moves_toward": r.get("moves_toward"), "kept": r.get("kept")}
                  for r in result.robustness]
    return {"divide_points": points, "contrasts": contrasts, "knickpoints": knickpoints,
            "streams": _stream_rows(result), "robustness": robustness}


def _insert_after(row: dict, key: str, extra: dict) -> dict:
    out = {}
    for k, v in row.items():
        out[k] = v
        if k == key:
            out.update(extra)
    return out


_HEADERS = {
    "contrasts": ["metric", "unit", "a", "b", "difference", "ci95_low", "ci95_high", "moves_toward", "n_points",
                  "rule"],
    "knickpoints": ["knickpoint", "side", "kind", "x", "y", "lon", "lat", "elevation_m", "distance_to_divide_m",
                    "area_m2", "chi_m", "chi_base_m", "delta_ksn", "step_m", "p_value", "q_value",
                    "celerity_defined", "celerity_note", "arrival_years_low", "arrival_years_best",
                    "arrival_years_high"],
    "robustness": ["change", "moves_toward", "kept"],
}


def _csv_value(v: Any) -> str:
    v = _finite(v)
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return format(v, ".10g")
    return str(v)


def csv_text(rows: Sequence[dict], header: Iterable[str] | None = None) -> str:
    """Rows as CSV (RFC 4180 quoting, CRLF line ends); empty cells for missing values."""
    header = list(header) if header is not None else (list(rows[0]) if rows else [])
    for row in rows:
        header += [k for k in row if k not in header]
    buf = io.StringIO()
    writer = csv.writer(buf)
    writer.writerow(header)
    for row in rows:
        writer.writerow([_csv_value(row.get(k)) for k in header])
    return buf.getvalue()


# ---------------------------------------------------------------- writing
def write_layers(result: Assessment, folder: Path) -> list[Path]:
    """Write ``layers/*.geojson`` into ``folder`` (nothing when the DEM has no CRS)."""
    return [write_json(Path(folder) / f"{name}.geojson", fc, indent=None, parents=True)
            for name, fc in geojson_layers(result).items()]


def write_rasters(result: Assessment, folder: Path) -> list[Path]:
    """Write ``rasters/*.tif`` (χ, ksn, side labels) on the DEM grid into ``folder``."""
    return [write_raster(Path(folder) / f"{name}.tif", array, result.dem, parents=True, **options)
            for name, (array, options) in raster_layers(result).items()]


def write_tables(result: Assessment, folder: Path) -> list[Path]:
    """Write ``tables/*.csv`` into ``folder``."""
    return [write_text(Path(folder) / f"{name}.csv", csv_text(rows, _HEADERS.get(name)), parents=True)
            for name, rows in tables(result).items()]
