"""The families of the model-landscape benchmark: how each one is forced.

Every family is written in one *canonical frame*: the divide runs north-south
between side a (the west edge) and side b (the east edge), and the forcing
acts on side b. :mod:`divides.model.benchmark` mirrors (forcing on side a) and
rotates (sides north and south) the inputs before running the model, so the
benchmark holds every family on either side and in both orientations.

A family is three things: the forcing of the spin-up (steady state under it,
or none for a landscape that is still growing), the change applied at the end
of the spin-up, and the forcing kept while the landscape is observed and then
continued to measure the truth. ``expected`` is what theory says the divide
does in the canonical frame; it is *not* the truth (the truth is measured by
continuing the run) and serves only to check that a set-up does what it is
meant to.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from divides.model.forcing import open_edge

__all__ = ["FAMILIES", "STABLE_FAMILIES", "Plan", "plan"]

#: Family names, in the order the benchmark cycles through them.
FAMILIES: tuple[str, ...] = (
    "base_level_fall_sudden",
    "base_level_fall_steady",
    "tilt_uplift_n1",
    "tilt_uplift_n_other",
    "block_uplift",
    "weak_rock_exposed",
    "resistant_unit_exhumed",
    "runoff_contrast",
    "off_centre_relaxing",
    "capture_area_loss",
    "steady_uplift_contrast",
    "steady_erodibility_contrast",
    "steady_runoff_contrast",
    "steady_symmetric",
)

#: Families meant as stable controls (steady state; lopsided or symmetric).
STABLE_FAMILIES: tuple[str, ...] = (
    "steady_uplift_contrast",
    "steady_erodibility_contrast",
    "steady_runoff_contrast",
    "steady_symmetric",
)


@dataclass
class Plan:
    """How one landscape is forced, in the canonical frame (forcing on side b, the east).

    Attributes
    ----------
    spin : dict
        Forcing of the spin-up (``uplift``, ``erodibility``, ``runoff`` and
        ``edges`` for :func:`~divides.model.simulate`); None when the
        landscape is observed while still growing from its starting ridge.
    crest : float
        Position of the starting ridge's crest as a fraction of the width.
    change : callable or None
        Applied to the elevation array at the end of the spin-up (e.g. a
        capture); returns the new array.
    forcing : dict
        Forcing while observed and continued (same keys as ``spin``).
    observe_tau : float
        Years between the change and the observed DEM, in response times.
    expected : str
        Theory's direction in the canonical frame: ``"a"``, ``"b"`` or ``"stable"``.
    details : dict
        The family's own drawn numbers (JSON-ready), for the record.
    """

    spin: dict | None
    crest: float
    change: Callable[[np.ndarray], np.ndarray] | None
    forcing: dict
    observe_tau: float
    expected: str
    details: dict = field(default_factory=dict)


def _east_of(shape: tuple[int, int], fraction: float) -> np.ndarray:
    """Cells east of a north-south line at ``fraction`` of the width (side b of it)."""
    rows, cols = shape
    return np.broadcast_to(np.arange(cols) / (cols - 1) > fraction, (rows, cols)).copy()


def _crest_east(z: np.ndarray) -> np.ndarray:
    """Cells east of each row's crest (highest cell of the row) in a steady landscape."""
    crest = np.argmax(z, axis=1)
    return np.arange(z.shape[1])[None, :] > crest[:, None]


def _capture(rng: np.random.Generator, rows: int, cols: int) -> tuple[Callable[[np.ndarray], np.ndarray], dict]:
    """A valley of side a extended through the crest into side b over a stretch of rows."""
    length = float(rng.uniform(0.2, 0.5))
    depth = float(rng.uniform(0.08, 0.2))
    r0 = int(rng.integers(int(0.1 * rows), int((0.9 - length) * rows) + 1))
    r1 = r0 + max(3, int(round(length * rows)))
    reach = max(3, int(round(depth * cols)))
    below = int(rng.integers(3, 9))  # the strip starts this many cells down side a's valley

    def change(z: np.ndarray) -> np.ndarray:
        z = z.copy()
        for r in range(r0, min(r1, rows - 1)):
            c_d = int(np.argmax(z[r]))
            c_head = max(c_d - below, 1)
            head = z[r, c_head]
            rise = 0.5 * (z[r, c_d] - head) / max(c_d - c_head, 1)  # half side a's gradient, per cell
            c = np.arange(c_head + 1, min(c_d + reach, cols - 2))
            # Side a's valley carried on through the crest into b at half its gradient: the strip now
            # drains to a, and side b's slopes beyond it face a lower, steeper captor.
            z[r, c] = np.minimum(z[r, c], head + rise * (c - c_head))
        return z

    return change, {"rows_share": length, "reach_share": depth, "cells_down_a": below}


def plan(family: str, rng: np.random.Generator, shape: tuple[int, int], u0: float, k0: float,
         lateral: dict) -> Plan:
    """Draw the forcing of one landscape of ``family`` (canonical frame).

    Parameters
    ----------
    family : str
        One of :data:`FAMILIES`.
    rng : numpy.random.Generator
        Source of the family's own numbers.
    shape : (rows, cols)
        Grid in the canonical frame (rows along the divide).
    u0, k0 : float
        Reference uplift rate (m/yr) and erodibility.
    lateral : dict
        Conditions of the north and south edges (``"open"`` or ``"closed"``).

    Returns
    -------
    Plan
    """
    edges = {"west": "open", "east": "open", **lateral}
    uniform = {"uplift": u0, "erodibility": k0, "runoff": None, "edges": edges}
    observe = float(rng.uniform(0.2, 1.0))

    def forced(**changes: object) -> dict:
        return {**uniform, **changes}

    if family == "base_level_fall_sudden":
        drop = float(rng.uniform(0.05, 0.3))
        return Plan(uniform, 0.5, None, forced(edges={**edges, "east": ("drop", drop)}), observe, "a",
                    {"drop_share_of_relief": drop})
    if family == "base_level_fall_steady":
        rate = float(rng.uniform(0.3, 2.0))
        return Plan(uniform, 0.5, None, forced(edges={**edges, "east": open_edge(lowering_rate=rate * u0)}),
                    observe, "a", {"lowering_over_uplift": rate})
    if family in ("tilt_uplift_n1", "tilt_uplift_n_other"):
        g = float(rng.uniform(0.3, 0.8))
        x = np.arange(shape[1]) / (shape[1] - 1)
        u = np.broadcast_to(u0 * (1.0 + g * (2.0 * x - 1.0)), shape).copy()
        return Plan(uniform, 0.5, None, forced(uplift=u), observe, "b", {"tilt": g})
    if family == "block_uplift":
        fault, ratio = float(rng.uniform(0.55, 0.8)), float(rng.uniform(1.5, 3.0))
        u = np.where(_east_of(shape, fault), u0 * ratio, u0)
        return Plan(uniform, 0.5, None, forced(uplift=u), observe, "b", {"fault_at": fault, "ratio": ratio})
    if family in ("weak_rock_exposed", "runoff_contrast"):
        ratio = float(rng.uniform(1.5, 4.0))
        key, base = ("erodibility", k0) if family == "weak_rock_exposed" else ("runoff", 1.0)
        # The contrast starts at each row's crest: field built when the spin-up is known.
        return Plan(uniform, 0.5, None, forced(**{key: ("east_of_crest", base, ratio)}), observe, "a",
                    {"ratio": ratio})
    if family == "resistant_unit_exhumed":
        start, width, ratio = float(rng.uniform(0.55, 0.8)), float(rng.uniform(0.05, 0.15)), float(rng.uniform(2.0, 5.0))
        band = _east_of(shape, start) & ~_east_of(shape, min(start + width, 0.97))
        return Plan(uniform, 0.5, None, forced(erodibility=np.where(band, k0 / ratio, k0)), observe, "b",
                    {"band_from": start, "band_width": width, "ratio": ratio})
    if family == "off_centre_relaxing":
        crest = float(rng.uniform(0.6, 0.75))
        return Plan(None, crest, None, uniform, float(rng.uniform(1.0, 2.5)), "a", {"crest_at": crest})
    if family == "capture_area_loss":
        change, details = _capture(rng, *shape)
        # Right after the jump the new crest has b's steep flank on one side and the gentler captured
        # valley on the other: by Gilbert's law the steeper side erodes faster, so the divide relaxes
        # back toward the captor, a; observed within 0.05 τ of the capture.
        return Plan(uniform, 0.5, change, uniform, float(rng.uniform(0.0, 0.05)), "a", details)
    if family.startswith("steady_"):
        ratio = float(rng.uniform(1.5, 3.0))
        east = _east_of(shape, 0.5)
        fields = {
            "steady_uplift_contrast": {"uplift": np.where(east, u0 * ratio, u0)},
            "steady_erodibility_contrast": {"erodibility": np.where(east, k0 * ratio, k0)},
            "steady_runoff_contrast": {"runoff": np.where(east, ratio, 1.0)},
            "steady_symmetric": {},
        }[family]
        steady = forced(**fields)
        return Plan(steady, 0.5, None, steady, 0.0, "stable", {"ratio": ratio} if fields else {})
    raise ValueError(f"unknown benchmark family {family!r}; families are {', '.join(FAMILIES)}")


def resolve(forcing: dict, z: np.ndarray) -> dict:
    """Turn the placeholders of a plan's forcing into model inputs, given the steady surface ``z``.

    ``("east_of_crest", base, ratio)`` becomes a raster (``base * ratio`` east
    of each row's crest); ``("drop", share)`` on an edge becomes a base level
    lowered suddenly by that share of the landscape's relief.
    """
    out = dict(forcing)
    for key in ("erodibility", "runoff"):
        value = out.get(key)
        if isinstance(value, tuple) and value[0] == "east_of_crest":
            _, base, ratio = value
            out[key] = np.where(_crest_east(z), base * ratio, base)
    edges = dict(out["edges"])
    for name, cond in edges.items():
        if isinstance(cond, tuple) and cond[0] == "drop":
            relief = float(np.nanmax(z) - np.nanmin(z))
            edges[name] = open_edge(elevation=-cond[1] * relief)
    out["edges"] = edges
    return out
