"""``verdict.txt``: the verdict in plain words with the numbers it rests on."""

from __future__ import annotations

from typing import TYPE_CHECKING

from divides.assess.verdict import CAUTION

if TYPE_CHECKING:  # pragma: no cover - imports for type hints only
    from divides.assess.assessment import Assessment

__all__ = ["verdict_text", "direction_phrase", "side_label", "side_name", "provenance_line"]


def side_name(result: Assessment, side: str) -> str | None:
    """The name the user gave a side (``--name-a``/``name_a=``), or None."""
    return getattr(result.config, f"name_{side}", None)


def side_label(result: Assessment, side: str | None) -> str:
    """``"Tallow (side a)"`` with a name given, else ``"side a (west)"``: the letter with the SPEC."""
    if side not in ("a", "b"):
        return "neither side"
    name = side_name(result, side)
    if name:
        return f"{name} (side {side})"
    spec = (result.sides.a if side == "a" else result.sides.b).spec.text
    return f"side {side} ({spec})"


def direction_phrase(result: Assessment) -> str:
    """One short phrase for the verdict, e.g. ``"moving into side b (east)"``."""
    v = result.verdict
    if v.moves_toward in ("a", "b"):
        phrase = f"moving into {side_label(result, v.moves_toward)}"
        return phrase + (" (long-run tendency from χ only)" if v.basis == "chi" else "")
    return {"stable": "stable", "undetermined": "undetermined (the evidence conflicts)"}.get(
        v.moves_toward, v.moves_toward)


def _num(v: float | None, fmt: str = ".3g", unit: str = "") -> str:
    if v is None:
        return "n/a"
    return f"{v:{fmt}}{(' ' + unit) if unit else ''}"


def verdict_text(result: Assessment, *, summary: dict | None = None) -> str:
    """The text of ``verdict.txt``.

    A header of key numbers (DEM, sides, verdict, confidence, rate,
    equilibrium divide, the main parameters) followed by the verdict text of
    the assessment and the caution, which is always present. ``summary`` is
    the document written as summary.json (default ``result.summary``); its
    ``provenance``, when present, closes the text.
    """
    s = result.summary if summary is None else summary
    v = s["verdict"]
    dem = s["dem"]
    p = s["parameters"]
    lines = ["DIVIDE ASSESSMENT (screening result)", ""]
    dx, dy = dem["cell_size_m"]
    lines.append(f"DEM:         {dem['path'] or '(in memory)'}; {dem['crs'] or 'no CRS'}; "
                 f"{dem['shape'][0]} x {dem['shape'][1]} cells of {dx:.3g} x {dy:.3g} m")
    for name in ("a", "b"):
        side = s["sides"][name]
        given = side_name(result, name)
        lines.append(f"Side {name}:      {given + ', ' if given else ''}{side['spec']}; {_num(side['area_km2'])} km²; "
                     f"{side['n_channel_heads']} channel heads")
    lines.append(f"Divide:      {_num(s['divide'].get('length_m'), ',.0f', 'm')} long, "
                 f"{s['divide'].get('n_samples', 'n/a')} sample points")
    lines.append(f"Verdict:     {direction_phrase(result)}")
    if v["aggressor"] in ("a", "b"):
        lines.append(f"Aggressor:   {side_label(result, v['aggressor'])}")
    lines.append(f"Confidence:  {v['confidence']:.2f} (0 = none, 1 = certain)")
    rate = v.get("rate_mm_per_yr")
    if rate:  # two significant figures: the interval spans about a factor of ten
        lines.append(f"Rate:        {_num(rate['best'], '.2g')} mm/yr (95 % interval {_num(rate['low'], '.2g')} to "
                     f"{_num(rate['high'], '.2g')} mm/yr)")
    elif v.get("rate_withheld"):
        lines.append(f"Rate:        withheld ({v['rate_withheld']})")
    else:
        lines.append("Rate:        not computed (no erosion rate, erodibility or knickpoint age given)")
    eq = s.get("equilibrium") or {}
    if eq.get("median_distance_m") is not None:
        lines.append(f"Equilibrium: about {eq['median_distance_m']:,.0f} m from the present divide, "
                     f"into side {eq['toward']} (first-order)")
    theta = s["profiles"]["theta"]
    lines.append(f"Parameters:  θ = {_num(theta['value'])} ({theta['method']}); channel area "
                 f"{_num(p.get('channel_area_used_m2'))} m²; reference area {_num(p.get('reference_area_used_m2'))} m²; "
                 f"base level {_num(p.get('base_level_used_m'), '.1f')} m")
    lines.append(f"Knickpoints: {len(s['knickpoints'])} significant")
    lines += ["", v["text"].rstrip()]
    if CAUTION not in v["text"]:
        lines += ["", CAUTION]
    if s.get("provenance"):
        lines += ["", provenance_line(s["provenance"])]
    return "\n".join(lines) + "\n"


def provenance_line(prov: dict) -> str:
    """One line saying what made the outputs: version, time, command, DEM file and its SHA-256."""
    command = " ".join(prov.get("command") or []) or "(written from Python)"
    sha = prov.get("dem_sha256")
    return (f"Made by divides {prov.get('tool_version')} on {prov.get('created_utc')}; command: {command}; "
            f"DEM {prov.get('dem_file') or '(in memory)'}" + (f", SHA-256 {sha}" if sha else ""))
