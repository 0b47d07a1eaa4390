"""Outputs of a regional screening: segments.geojson, segments.csv, screening.json, a map and report.html."""

from __future__ import annotations

import base64
import datetime as _dt
import os
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from matplotlib import colormaps
from matplotlib.collections import LineCollection
from matplotlib.cm import ScalarMappable
from matplotlib.colors import Normalize

from divides.assess.verdict import CAUTION
from divides.io.writing import atomic_write, write_json, write_text
from divides.report import html as _html

from divides.report import figures as _figures
from divides.report.figures import _display_extent, _figure, _frame, _hillshade, map_furniture, to_png
from divides.report.labels import parameter_label, parameter_value
from divides.report.layers import _collection, _feature, _lonlat, csv_text
from divides.report.provenance import provenance as _provenance
from divides.report.provenance import public_summary
from divides.report.text import provenance_line
from divides.report.writer import staged_output

if TYPE_CHECKING:  # pragma: no cover - types only
    from divides.assess.screen import Screening

__all__ = ["write_screening", "segment_features", "segment_rows", "regional_map"]

_COLUMNS = ("rank", "instability", "confidence", "length_m", "basin_1", "basin_2", "moves_toward_basin",
            "motion_azimuth_deg", "verdict", "basis", "n_points", "facing_share", "x_mid", "y_mid")


def segment_rows(result: Screening) -> list[dict]:
    """One table row per segment (the columns of segments.csv)."""
    rows = []
    for s in result.segments:
        line = s["line"]
        mid = line.x.size // 2
        rows.append({
            "rank": s["rank"], "instability": round(float(s["instability"]), 4), "confidence": s["confidence"],
            "length_m": round(float(s["length_m"]), 1), "basin_1": s["basins"][0], "basin_2": s["basins"][1],
            "moves_toward_basin": s["moves_toward_basin"],
            "motion_azimuth_deg": None if s["motion_azimuth_deg"] is None else round(s["motion_azimuth_deg"], 1),
            "verdict": s["verdict"], "basis": s["basis"], "n_points": s["n_points"],
            "facing_share": round(float(s["facing_share"]), 3), "x_mid": float(line.x[mid]), "y_mid": float(line.y[mid]),
        })
    return rows


def segment_features(result: Screening) -> list[dict]:
    """RFC 7946 LineString features (WGS 84 lon/lat), one per segment, ranked."""
    features = []
    for s in result.segments:
        line = s["line"]
        lon, lat = _lonlat(result.dem, line.x, line.y)
        props = {k: s[k] for k in ("rank", "instability", "confidence", "length_m", "basins", "moves_toward_basin",
                                   "motion_azimuth_deg", "verdict", "basis", "n_points", "facing_share")}
        props["basins"] = [int(b) for b in s["basins"]]
        features.append(_feature({"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()},
                                 props))
    return features


def regional_map(result: Screening):
    """Hillshade with every segment coloured by instability and arrows toward the victim basin."""
    dem = result.dem
    frame = _frame(dem)
    fig = _figure(8.0, 8.0 * dem.shape[0] / max(dem.shape[1], 1) * 0.9 + 1.2)
    ax = fig.add_subplot()
    _hillshade(ax, dem, frame)
    cmap = colormaps["cividis"]
    norm = Normalize(0.0, 1.0)
    segs, colours, widths = [], [], []
    for s in result.segments:
        line = s["line"]
        segs.append(np.column_stack([line.x * frame.scale, line.y * frame.scale]))
        colours.append(cmap(norm(s["instability"])))
        widths.append(1.0 + 3.0 * s["instability"])
    ax.add_collection(LineCollection(segs, colors=colours, linewidths=widths, zorder=3))
    span = max(dem.bounds[2] - dem.bounds[0], dem.bounds[3] - dem.bounds[1]) * frame.scale
    for s in result.segments:
        if s["motion_azimuth_deg"] is None:
            continue
        line = s["line"]
        mid = line.x.size // 2
        az = np.radians(s["motion_azimuth_deg"])
        length = 0.03 * span
        ax.annotate("", xy=(line.x[mid] * frame.scale + length * np.sin(az),
                            line.y[mid] * frame.scale + length * np.cos(az)),
                    xytext=(line.x[mid] * frame.scale, line.y[mid] * frame.scale),
                    arrowprops={"arrowstyle": "-|>", "color": "#D55E00", "lw": 1.5}, zorder=4)
    left, right, bottom, top = _display_extent(dem, frame, 1)
    ax.set_xlim(left, right)
    ax.set_ylim(bottom, top)
    ax.set_xlabel(frame.xlabel)
    ax.set_ylabel(frame.ylabel)
    ax.set_aspect(frame.aspect)
    map_furniture(fig, ax, dem, frame)
    fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, shrink=0.7, label="instability (0 = no evidence of motion, 1 = strong)")
    ax.set_title("Divide segments by instability; arrows point toward the basin being captured", fontsize=10)
    return fig


def _parameter_table(params: dict) -> str:
    rows = []
    for key, value in params.items():
        name, unit = parameter_label(key)
        rows.append([_html._e(name), _html._e(parameter_value(value)), _html._e(unit),
                     f"<code>{_html._e(key)}</code>"])
    return _html._table(["Parameter", "Value", "Unit", "Key in screening.json"], rows, numeric={1})


def _report(result: Screening, png: bytes, rows: list[dict], document: dict, top: int = 25) -> str:
    e = _html._e
    directed = sum(r["moves_toward_basin"] is not None for r in rows)
    header = ["rank", "instability", "confidence", "length (m)", "basins", "moves toward basin",
              "bearing (°)", "basis"]
    table = _html._table(header, [[str(r["rank"]), f"{r['instability']:.2f}", f"{r['confidence']:.2f}",
                                   f"{r['length_m']:,.0f}", f"{r['basin_1']} | {r['basin_2']}",
                                   "—" if r["moves_toward_basin"] is None else str(r["moves_toward_basin"]),
                                   "—" if r["motion_azimuth_deg"] is None else f"{r['motion_azimuth_deg']:.0f}",
                                   e(r["basis"])] for r in rows[:top]], numeric={0, 1, 2, 3, 6})
    p = result.parameters
    caution = f"<div class=\"caution\" role=\"note\"><b>Caution.</b> {e(CAUTION)}</div>"
    lead = (f"{len(rows)} divide segments between {int(result.labels.max())} basins of at least "
            f"{p['min_basin_area_m2'] / 1e6:.3g} km² ({e(p['level'])}); {directed} show evidence of motion.")
    body = "".join([
        "<h1>Regional divide screening</h1>",
        f"<p class=\"sub\">DEM {e(document['dem']['path'] or '(in memory)')} · "
        f"{e(document['dem']['crs'] or 'no CRS')} · "
        f"report of {e(_dt.datetime.now(_dt.timezone.utc).date().isoformat())}</p>",
        caution,
        f"<section class=\"verdict\" id=\"verdict\"><p class=\"lead\">{lead}</p>"
        "<p>Instability = confidence of the segment's verdict × strength of the agreeing contrasts; "
        "a screening ranks where to look first, it does not replace an assessment of each divide "
        "(<code>divides assess</code>) and field work.</p></section>",
        "<figure><img alt=\"regional map\" src=\"data:image/png;base64,"
        + base64.b64encode(png).decode("ascii") + "\"><figcaption>Divide segments coloured by instability "
        "(cividis: colour-blind safe and readable in greyscale); arrows point toward the basin losing ground. "
        "<span class=\"note\">(files: figures/regional_map.png, figures/regional_map.svg)</span>"
        "</figcaption></figure>",
        f"<h2>The {min(top, len(rows))} least stable segments</h2>", table,
        "<h2>Parameters</h2>", _parameter_table(p),
        "<h2>Caution</h2>", caution,
        f"<footer id=\"provenance\"><p>{e(provenance_line(document.get('provenance') or {}))}</p></footer>",
    ])
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>Regional divide "
            f"screening</title><style>{_html._CSS}</style></head><body><main>{body}</main></body></html>\n")


def write_screening(result: Screening, out_dir, *, overwrite: bool = False, command: list[str] | None = None,
                    cli: bool = False) -> Path:
    """Write a screening's outputs into ``out_dir`` atomically (see :func:`divides.report.writer.staged_output`).

    ``screening.json`` and the ``summary.json`` marker carry ``provenance``
    (see :func:`divides.report.provenance.provenance`; ``command`` as run on
    the command line, None from Python); no output holds a folder path.
    ``cli`` makes errors name ``--out``/``--overwrite``.
    """
    rows = segment_rows(result)
    prov = _provenance(result.dem.path, command=command)
    document = public_summary(result.to_dict(), prov)
    with staged_output(out_dir, overwrite=overwrite, cli=cli) as tmp:
        write_json(tmp / "screening.json", document)
        if result.dem.crs is not None:
            write_json(tmp / "segments.geojson", _collection(segment_features(result)))
        write_text(tmp / "segments.csv", csv_text(rows, _COLUMNS))
        fig = regional_map(result)
        png = to_png(fig)
        with atomic_write(tmp / "figures" / "regional_map.png", parents=True) as f:
            f.write_bytes(png)
        with atomic_write(tmp / "figures" / "regional_map.svg", parents=True) as f:
            f.write_bytes(_figures.to_svg(fig))
        write_text(tmp / "report.html", _report(result, png, rows, document))
        # marks the folder as a divides output, so --overwrite may replace it later
        write_json(tmp / "summary.json", {"schema": "divides.screening/1", "provenance": prov,
                                          "n_segments": len(rows)})
    return Path(os.path.abspath(os.fspath(out_dir)))
