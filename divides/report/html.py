"""``report.html``: a self-contained page (figures embedded, no network needed) for one assessment.

Every piece of text from the assessment passes through :func:`html.escape`;
figures are embedded as ``data:`` URIs; there are no scripts and no links
to other sites, so the page opens offline and can be archived as one file.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
from typing import TYPE_CHECKING, Any

from divides.assess.verdict import CAUTION
from divides.report.labels import parameter_label, parameter_value
from divides.report.provenance import provenance as _provenance
from divides.report.provenance import public_summary
from divides.report.text import direction_phrase, provenance_line, side_label

if TYPE_CHECKING:  # pragma: no cover - imports for type hints only
    from divides.assess.assessment import Assessment

__all__ = ["render_report", "REFERENCES", "FIGURE_TITLES"]

#: Works the methods rest on (author, year, title, journal), shown in the report.
REFERENCES = (
    "Barnes, R., Lehman, C., Mulla, D. (2014). Priority-flood: an optimal depression-filling and "
    "watershed-labeling algorithm for digital elevation models. Computers & Geosciences 62, 117–127.",
    "Forte, A. M., Whipple, K. X. (2018). Criteria and tools for determining drainage divide stability. "
    "Earth and Planetary Science Letters 493, 102–117.",
    "He, C., et al. (2024). Drainage divide migration and implications for climate and biodiversity. "
    "Nature Reviews Earth & Environment 5.",
    "Hergarten, S., Robl, J., Stüwe, K. (2016). Tectonic geomorphology at small catchment sizes – extensions "
    "of the stream-power approach and the χ method. Earth Surface Dynamics 4, 1–9.",
    "Mudd, S. M., Attal, M., Milodowski, D. T., Grieve, S. W. D., Valters, D. A. (2014). A statistical "
    "framework to quantify spatial variation in channel gradients using the integral method of channel "
    "profile analysis. Journal of Geophysical Research: Earth Surface 119, 138–152.",
    "Perron, J. T., Royden, L. (2013). An integral approach to bedrock river profile analysis. "
    "Earth Surface Processes and Landforms 38, 570–576.",
    "Scherler, D., Schwanghart, W. (2020). Drainage divide networks – Part 2: Response to perturbations. "
    "Earth Surface Dynamics 8, 261–274.",
    "Willett, S. D., McCoy, S. W., Perron, J. T., Goren, L., Chen, C.-Y. (2014). Dynamic reorganization "
    "of river basins. Science 343, 1248765.",
)

#: Figure name -> heading in the report.
FIGURE_TITLES = {
    "map": "Map of the divide",
    "chi_map": "χ map",
    "chi_elevation": "χ–elevation profiles",
    "contrasts": "Across-divide contrasts",
    "long_profiles": "Long profiles",
    "slope_area": "Slope–area",
}

_METHODS = (
    ("Flow routing",
     "Closed depressions of the DEM are filled (or breached) so that every cell drains (Barnes et al. 2014); "
     "each cell drains to its steepest downhill neighbour, and drainage area accumulates downstream. "
     "Channels are cells draining more than the channel threshold area."),
    ("Sides and base level",
     "Each side is the union of the basins draining off a DEM edge or through the given points. Both sides "
     "are measured from a common base level, the higher of their lowest channel elevations (Willett et al. "
     "2014; Forte & Whipple 2018)."),
    ("χ and concavity",
     "χ = ∫ (A₀/A)^θ dx is integrated upstream from the base level (Perron & Royden 2013). With uniform "
     "uplift and erodibility, the divide moves toward the side whose channel heads have the higher χ "
     "(Willett et al. 2014); this is the long-run tendency. θ is given, the reference 0.45, or the value "
     "that makes tributaries and trunks most collinear in χ–elevation space; slope–area regression is "
     "shown for comparison. Small catchments near the divide call for care with both (Hergarten et al. 2016)."),
    ("Steepness and knickpoints",
     "Each stream's elevation against χ is split into straight segments; a segment's slope is its "
     "normalised steepness ksn (Mudd et al. 2014). Breaks between segments are tested for significance; "
     "significant slope breaks and steps are reported as knickpoints migrating upstream."),
    ("Present motion",
     "Along the divide, each side's channel elevation at a reference drainage area, mean gradient and "
     "local relief upstream of it (Forte & Whipple 2018) and hillslope relief between the divide and the "
     "channel head (Scherler & Schwanghart 2020) are compared. Differences get 95 % intervals from a "
     "moving-block bootstrap along the divide, because neighbouring points are not independent."),
    ("Verdict",
     "Near-divide measures speak for the present motion and χ for the long-run tendency (Forte & Whipple "
     "2018). Each measure's standardised contrast, its consistency along the divide and the effective "
     "number of samples feed a three-outcome logistic model fitted on model landscapes whose motion was "
     "measured by continuing each run (docs/validation.md). It gives the probabilities that the divide "
     "moves toward a, toward b or is stable; an outcome is returned only when its probability reaches the "
     "threshold (default 0.8), otherwise the verdict is undetermined. χ alone never makes a direction, and "
     "too few independent samples along the divide give \"insufficient data\". The confidence is that "
     "calibrated probability; re-runs with perturbed inputs are reported beside it."),
    ("Rates, arrival times and equilibrium",
     "Given an erosion rate, an erodibility or a dated knickpoint, steepness is turned into erosion rates, a "
     "divide migration rate (checked against measured rates compiled by He et al. 2024) and the time "
     "knickpoints need to reach the channel heads. The equilibrium divide is the first-order position at "
     "which χ would balance across the divide (Willett et al. 2014)."),
)

_CSS = """
body{font-family:system-ui,-apple-system,'Segoe UI',Roboto,Arial,sans-serif;color:#1d1d1d;margin:0;
background:#fafafa;line-height:1.45}
main{max-width:1000px;margin:0 auto;padding:1.5rem 1.2rem 3rem;background:#fff}
h1{font-size:1.55rem;margin:.2rem 0 .3rem}h2{font-size:1.2rem;margin-top:2rem;border-bottom:1px solid #ddd;
padding-bottom:.2rem}h3{font-size:1rem;margin:1.2rem 0 .3rem}
.sub{color:#555;margin:0 0 1rem}
.caution{border-left:5px solid #D55E00;background:#fff4ec;padding:.6rem .9rem;margin:1rem 0}
.verdict{border:1px solid #ccc;border-radius:6px;padding:.8rem 1rem;background:#f5f8fb}
.verdict .lead{font-size:1.12rem;font-weight:600;margin:.2rem 0 .5rem}.verdict .rest{margin:.6rem 0 .2rem}
.meter{height:.7rem;background:#e4e4e4;border-radius:4px;overflow:hidden;max-width:22rem}
.meter span{display:block;height:100%;background:#0072B2}
.keys{display:grid;grid-template-columns:repeat(auto-fill,minmax(14rem,1fr));gap:.4rem 1rem;margin:.8rem 0}
.keys div{background:#f3f3f3;padding:.35rem .6rem;border-radius:4px}.keys b{display:block;font-size:.8rem;
color:#555;font-weight:500}
table{border-collapse:collapse;width:100%;font-size:.88rem;margin:.5rem 0}
th,td{border-bottom:1px solid #e2e2e2;padding:.28rem .45rem;text-align:left;vertical-align:top}
th{background:#f0f0f0}td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
figure{margin:1rem 0}figure img{max-width:100%;height:auto;border:1px solid #eee}
figcaption{font-size:.88rem;color:#444}
.a{color:#0072B2;font-weight:600}.b{color:#B07000;font-weight:600}
.note{font-size:.85rem;color:#555}
footer{margin-top:2rem;font-size:.8rem;color:#666}
"""


def _e(value: Any) -> str:
    """Escaped text (quotes too, so it is safe in attributes)."""
    return html.escape("" if value is None else str(value), quote=True)


def _n(value: Any, fmt: str = ".3g", unit: str = "") -> str:
    """A number for a table cell; "—" when missing."""
    if value is None or isinstance(value, bool):
        return "—" if value is None else _e(value)
    try:
        text = format(float(value), fmt)
    except (TypeError, ValueError):
        return _e(value)
    if text in ("nan", "inf", "-inf"):
        return "—"
    return _e(text + (f" {unit}" if unit else ""))


def _years(value: Any) -> str:
    if value is None:
        return "—"
    v = float(value)
    return _e(f"{v:,.0f}" if abs(v) < 1e7 else f"{v:.3g}")


def _table(header: list[str], rows: list[list[str]], numeric: set[int] | None = None) -> str:
    """A table from already-escaped cells."""
    numeric = numeric or set()
    head = "".join(f"<th>{h}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td class=\"n\">{c}</td>" if i in numeric else f"<td>{c}</td>"
                         for i, c in enumerate(row)) + "</tr>"
        for row in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _side_span(result: Assessment, side: str | None) -> str:
    if side not in ("a", "b"):
        return _e(side if side is not None else "none")
    return f"<span class=\"{side}\">{_e(side_label(result, side))}</span>"


# ------------------------------------------------------------------ sections
def _verdict_section(result: Assessment, s: dict) -> str:
    v = s["verdict"]
    text_lines = [ln for ln in v["text"].splitlines() if ln.strip() and ln.strip() != CAUTION]
    lead = text_lines[0] if text_lines else direction_phrase(result)
    conf = float(v["confidence"] or 0.0)
    parts = [f"<p class=\"lead\">{_e(lead)}</p>",
             f"<p>Confidence {_e(f'{conf:.2f}')} "
             f"<span class=\"note\">(calibrated probability of this outcome on model landscapes)</span></p>"
             f"<div class=\"meter\" role=\"img\" aria-label=\"confidence {_e(f'{conf:.2f}')}\">"
             f"<span style=\"width:{max(0.0, min(conf, 1.0)) * 100:.0f}%\"></span></div>"]
    # The box holds the sentences of the verdict; the measure-by-measure lines ("- ...") go to the
    # evidence section, so that the box fits the first screen whatever the number of measures.
    sentences = [line for line in text_lines[1:] if not line.startswith("- ")]
    parts.append("<p class=\"rest\">" + " ".join(_e(line) for line in sentences)
                 + " <a href=\"#evidence\">Each measure below.</a></p>")
    return "<section class=\"verdict\" id=\"verdict\">" + "".join(parts) + "</section>"


def _measure_lines(s: dict) -> str:
    """The verdict's measure-by-measure lines ("- ..."), as a list."""
    lines = [ln.strip()[2:] for ln in s["verdict"]["text"].splitlines() if ln.strip().startswith("- ")]
    return "<ul>" + "".join(f"<li>{_e(line)}</li>" for line in lines) + "</ul>" if lines else ""


def _key_numbers(result: Assessment, s: dict) -> str:
    v = s["verdict"]
    items = [("Verdict", _e(direction_phrase(result))),
             ("Aggressor", _side_span(result, v["aggressor"]) if v["aggressor"] else "none"),
             ("Basis", _e({"near-divide": "near-divide measures (present motion)",
                           "near-divide and forward run": "near-divide measures and a forward run of the model",
                           "forward run": "a forward run of the model (too few near-divide samples)",
                           "chi": "χ only (long-run tendency)", "none": "no significant contrast",
                           "conflict": "conflicting measures", "insufficient data": "insufficient data",
                           "undetermined": "no outcome reached the confidence threshold"}.get(
                               v.get("basis"), v.get("basis"))))]
    fwd = (v.get("forward_run") or {}).get("shift_cells")
    items.append(("Forward run", _e("not made" if fwd is None else
                                    f"{abs(fwd):.2f} model cells toward side {'b' if fwd > 0 else 'a'} in "
                                    f"{v['forward_run']['horizon_response_times']:g} response times")))
    rate = v.get("rate_mm_per_yr")
    items.append(("Migration rate", _e(f"{rate['best']:.2g} mm/yr ({rate['low']:.2g}–{rate['high']:.2g})")
                  if rate and rate.get("best") is not None else "not computed"))
    eq = s.get("equilibrium") or {}
    if eq.get("median_distance_m") is not None:
        items.append(("Equilibrium divide", _e(f"about {eq['median_distance_m']:,.0f} m into side {eq['toward']}")))
    theta = s["profiles"]["theta"]
    ci = theta.get("ci95") or [None, None]
    ci_text = f" (95 % {ci[0]:.2f}–{ci[1]:.2f})" if None not in ci else ""
    items.append(("Concavity θ", _e(f"{theta['value']:.3g}, {theta['method']}{ci_text}")))
    ksn = s["profiles"]["ksn"]
    unit = f"m^{2 * float(theta['value']):.2g}" if theta.get("value") is not None else "m^2θ"
    items.append((f"Median ksn a / b ({unit}, A₀ = 1 m²)", f"{_n(ksn['a'])} / {_n(ksn['b'])}"))
    items.append(("Divide length", _n(s["divide"].get("length_m"), ",.0f", "m")))
    items.append(("Knickpoints", _e(len(s["knickpoints"]))))
    for name in ("a", "b"):
        side = s["sides"][name]
        items.append((f"Side {name}", _e(f"{side['spec']}: {side['area_km2']:.3g} km², "
                                         f"{side['n_channel_heads']} channel heads")))
    return "<div class=\"keys\">" + "".join(f"<div><b>{_e(k)}</b>{val}</div>" for k, val in items) + "</div>"


def _evidence_section(result: Assessment, s: dict) -> str:
    rows = []
    for c in s["contrasts"]:
        lo, hi = c["ci95"]
        rows.append([
            _e(c["metric"].replace("_", " ")), _e(c["rule"]), _e(c["unit"]), _n(c["a"]), _n(c["b"]),
            _n(c["difference"]), f"{_n(lo)} to {_n(hi)}", _e(c["n_points"]),
            _side_span(result, c["moves_toward"]) if c["moves_toward"] in ("a", "b") else "no significant difference",
        ])
    table = _table(["Measure", "Divide moves toward", "Unit", "Side a", "Side b", "a − b", "95 % interval",
                    "Points", "Points toward"], rows, numeric={3, 4, 5, 6, 7})
    return ("<h2 id=\"evidence\">Evidence</h2><p>Each measure is read on both sides of every sample point of "
            "the divide. The interval comes from a moving-block bootstrap along the divide; a measure counts "
            "as evidence when its interval excludes zero and the difference is not negligibly small.</p>"
            + _measure_lines(s) + table)


def _figures_section(result: Assessment, figures: dict[str, bytes], captions: dict[str, str]) -> str:
    if not figures:
        return ""
    parts = ["<h2 id=\"figures\">Figures</h2>"]
    for name, png in figures.items():
        data = base64.b64encode(png).decode("ascii")
        title = FIGURE_TITLES.get(name, name)
        parts.append(f"<figure id=\"fig-{_e(name)}\"><h3>{_e(title)}</h3>"
                     f"<img src=\"data:image/png;base64,{data}\" alt=\"{_e(title)}\">"
                     f"<figcaption>{_e(captions.get(name, ''))} "
                     f"<span class=\"note\">(file: figures/{_e(name)}.png)</span></figcaption></figure>")
    return "".join(parts)


def _knickpoint_section(result: Assessment, s: dict, limit: int = 60) -> str:
    kps = s["knickpoints"]
    if not kps:
        return "<h2 id=\"knickpoints\">Knickpoints</h2><p>No significant knickpoint was found.</p>"

    def key(k: dict) -> float:
        a = k.get("arrival_years")
        return a["best"] if a and a.get("best") is not None else float("inf")

    ordered = sorted(kps, key=key)
    rows = []
    for k in ordered[:limit]:
        a = k.get("arrival_years") or {}
        rows.append([_side_span(result, k["side"]), _e(k.get("kind")), _n(k["x"], ".1f"), _n(k["y"], ".1f"),
                     _n(k["elevation_m"], ".1f"), _n(k["distance_to_divide_m"], ",.0f"), _n(k.get("delta_ksn")),
                     _n(k.get("step_m"), ".2f"), _n(k.get("p_value"), ".2g"),
                     _years(a.get("low")), _years(a.get("best")), _years(a.get("high"))])
    note = ""
    if len(ordered) > limit:
        note = (f"<p class=\"note\">The {limit} earliest of {len(ordered)} knickpoints are listed; all are in "
                "tables/knickpoints.csv.</p>")
    if all(k.get("arrival_years") is None for k in kps):
        note += ("<p class=\"note\">No arrival times: they need an erosion rate, an erodibility or the age of a "
                 "knickpoint.</p>")
    return ("<h2 id=\"knickpoints\">Knickpoints</h2><p>Significant breaks in the χ–elevation profiles, with "
            "the time each needs to travel to the channel head (years; 95 % interval), earliest first. When "
            "they arrive, the contrasts across the divide will change.</p>"
            + _table(["Side", "Kind", "x", "y", "Elevation (m)", "Distance to divide (m)", "Δksn", "Step (m)",
                      "p", "Arrival low", "Arrival best", "Arrival high"], rows,
                     numeric={2, 3, 4, 5, 6, 7, 8, 9, 10, 11}) + note)


def _robustness_section(result: Assessment, s: dict) -> str:
    rob = s.get("robustness") or {}
    runs = rob.get("runs") or []
    if not runs:
        return ("<h2 id=\"robustness\">Robustness</h2><p>Not checked in this run: nothing says whether a "
                "plausible change of the inputs would overturn the verdict.</p>")
    rows = [[_e(r.get("change")), _e(r.get("moves_toward")), "yes" if r.get("kept") else "<b>no</b>"] for r in runs]
    share = rob.get("share_kept")
    return (f"<h2 id=\"robustness\">Robustness</h2><p>The analysis was re-run with perturbed inputs; "
            f"{_e(f'{share:.0%}' if share is not None else 'n/a')} of the runs kept the verdict.</p>"
            + _table(["Change", "Verdict of the run (moves toward)", "Kept"], rows))


def _parameter_section(result: Assessment, s: dict) -> str:
    params = s["parameters"]
    automatic = set(result.automatic)

    def row(key: str, value: Any) -> list[str]:
        name, unit = parameter_label(key)
        return [_e(name), _e(parameter_value(value)), _e(unit), f"<code>{_e(key)}</code>"]

    header = ["Parameter", "Value", "Unit", "Key in summary.json"]
    given = [row(k, v) for k, v in params.items() if k not in automatic]
    chosen = [row(k, v) for k, v in params.items() if k in automatic]
    return ("<h2 id=\"parameters\">Parameters</h2><h3>Settings (given, or the default)</h3>"
            + _table(header, given, numeric={1})
            + "<h3>Chosen or derived by the tool</h3>" + _table(header, chosen, numeric={1}))


def _data_section(result: Assessment, s: dict) -> str:
    dem = s["dem"]
    cond = s.get("conditioning") or {}
    rows = [["DEM file", _e(dem["path"] or "(in memory)")], ["CRS", _e(dem["crs"] or "none")],
            ["Grid", _e(f"{dem['shape'][0]} × {dem['shape'][1]} cells of {dem['cell_size_m'][0]:.3g} × "
                        f"{dem['cell_size_m'][1]:.3g} m")],
            ["Conditioning", _e(parameter_value(cond))],
            ["Calibration", _e(parameter_value(s.get("calibration") or {}))]]
    notes = ""
    if result.dem.crs is None:
        notes = ("<p class=\"note\">The DEM has no coordinate reference system, so no GeoJSON layers were "
                 "written (they must be in longitude/latitude).</p>")
    files = ("<h3>Files beside this report</h3><ul>"
             "<li>summary.json: every number of this report, machine-readable</li>"
             "<li>verdict.txt: the verdict in plain text</li>"
             "<li>figures/*.png: the figures above</li>"
             "<li>layers/*.geojson: channels, divide points and lines, knickpoints and the equilibrium divide "
             "(longitude/latitude, WGS 84)</li>"
             "<li>rasters/*.tif: χ, ksn and side labels on the DEM grid</li>"
             "<li>tables/*.csv: divide points, contrasts, knickpoints, streams and robustness runs</li></ul>")
    return "<h2 id=\"data\">Data</h2>" + _table(["Item", "Value"], rows) + notes + files


def _methods_section() -> str:
    parts = ["<h2 id=\"methods\">Methods in brief</h2>"]
    parts += [f"<h3>{_e(title)}</h3><p>{_e(body)}</p>" for title, body in _METHODS]
    parts.append("<h3>References</h3><ol>" + "".join(f"<li>{_e(r)}</li>" for r in REFERENCES) + "</ol>")
    return "".join(parts)


def render_report(
    result: Assessment,
    figures: dict[str, bytes],
    *,
    captions: dict[str, str] | None = None,
    generated: _dt.date | None = None,
    summary: dict | None = None,
) -> str:
    """The whole ``report.html`` as a string.

    Parameters
    ----------
    result : Assessment
    figures : dict of str to bytes
        Figure name -> PNG bytes, embedded in this order.
    captions : dict of str to str, optional
        Figure name -> caption.
    generated : datetime.date, optional
        Date printed in the header (default: today, UTC).
    summary : dict, optional
        The summary.json document written beside the report (with
        ``provenance``); default: ``result.summary`` with a provenance made now.

    Returns
    -------
    str
        A complete HTML5 document with no external references.
    """
    from divides import __version__

    captions = captions or {}
    generated = generated or _dt.datetime.now(_dt.timezone.utc).date()
    s = summary if summary is not None else public_summary(result.summary, _provenance(result.dem.path))
    title = f"Divide assessment: {side_label(result, 'a')} vs {side_label(result, 'b')}"
    caution = f"<div class=\"caution\" role=\"note\"><b>Caution.</b> {_e(CAUTION)}</div>"
    body = "".join([
        f"<h1>{_e(title)}</h1>",
        f"<p class=\"sub\">DEM {_e(s['dem']['path'] or '(in memory)')} · {_e(s['dem']['crs'] or 'no CRS')} · "
        f"report of {_e(generated.isoformat())}</p>",
        caution,
        _verdict_section(result, s),
        _key_numbers(result, s),
        _evidence_section(result, s),
        _figures_section(result, figures, captions),
        _knickpoint_section(result, s),
        _robustness_section(result, s),
        _parameter_section(result, s),
        _data_section(result, s),
        _methods_section(),
        "<h2 id=\"caution\">Caution</h2>",
        caution,
        "<p>The verdict rests on a DEM and on models of river incision that assume, unless told otherwise, "
        "uniform rock, climate and uplift across the divide. Lithology, faults, glacial history, landslides, "
        "human works and DEM artefacts can all mimic or hide divide motion.</p>",
        f"<footer id=\"provenance\"><p>Made with divides {_e(__version__)}, an open screening tool.</p>"
        f"<p>{_e(provenance_line(s.get('provenance') or {}))}</p></footer>",
    ])
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{_e(title)}</title><style>{_CSS}</style></head><body><main>{body}</main></body></html>\n")
