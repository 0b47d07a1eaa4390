"""Analytic steady-state channel networks and profiles for the profile tests and benchmarks.

At steady state under uniform uplift and erodibility the stream-power law gives
z = z_b + ks · χ exactly, with χ = ∫ (A0/A)^θ dx and θ = m/n (Whipple & Tucker 1999;
Perron & Royden 2013). Here every stream has a drainage area that grows as a power of
the distance from its top, A(s) = c (L' − s)^p (a Hack-type growth; Hack 1957), so χ has
the closed form

    χ(s) = c^(−θ) [L'^(1 − pθ) − (L' − s)^(1 − pθ)] / (1 − pθ)
    (c^(−θ) ln(L'/(L' − s)) when pθ = 1),

and nothing of the code under test is used to build the truth. DEM error is added with
the project's error model: exponential correlation along each flow path, drawn node by
node downstream-first, e_k = φ_k e_down + √(1 − φ_k²) σ w_k, which is the exponential
(Ornstein–Uhlenbeck) field restricted to the tree.
"""

from __future__ import annotations

import numpy as np

from divides.profiles.knickpoints import KNICKPOINT_ALPHA, breaks_of
from divides.profiles.segments import segment_profile
from divides.terrain.dem_error import DemError


def closed_form_chi(s: np.ndarray, c: float, length: float, p: float, theta: float) -> np.ndarray:
    """χ from the stream's lower end to distance ``s`` for A(s) = c (length − s)^p (A0 = 1 m²)."""
    e = 1.0 - p * theta
    s = np.asarray(s, dtype=float)
    if abs(e) < 1e-12:  # p θ = 1: the integral of 1/(L' − s) is a logarithm
        return c ** (-theta) * np.log(length / (length - s))
    return c ** (-theta) * (length**e - (length - s) ** e) / e


def steady_basin(rng: np.random.Generator, *, theta: float, ks: float, dx: float = 30.0, n_trib: int = 6,
                 trunk_m: tuple[float, float] = (5000.0, 9000.0)) -> dict:
    """One basin (a trunk and tributaries) at steady state, receivers first, z from its own outlet."""
    length = float(rng.uniform(*trunk_m))
    c, p = float(rng.uniform(0.5, 2.0)), float(rng.uniform(1.7, 2.2))
    head = length + float(rng.uniform(300.0, 800.0))
    x = np.arange(0.0, length + dx / 2, dx)
    chi = closed_form_chi(x, c, head, p, theta)
    down = np.r_[-1, np.arange(x.size - 1)]
    step = np.r_[0.0, np.diff(x)]
    area = c * (head - x) ** p
    junctions = np.sort(rng.choice(np.arange(10, x.size - 40), size=n_trib, replace=False)) if n_trib else []
    # channel links as on a DEM: the trunk is cut at every junction
    link = np.searchsorted(junctions, np.arange(x.size), side="right").astype(np.int64)
    parts = [(down, step, area, chi, link)]
    size = x.size
    for t, j in enumerate(junctions):
        tl = float(rng.uniform(600.0, 2500.0))
        tc, tp = float(rng.uniform(0.3, 3.0)), float(rng.uniform(1.7, 2.2))
        th = tl + float(rng.uniform(200.0, 600.0))
        s = np.arange(dx, tl + dx / 2, dx)
        tchi = chi[j] + closed_form_chi(s, tc, th, tp, theta)
        tdown = np.r_[j, size + np.arange(s.size - 1)]
        parts.append((tdown, np.full(s.size, dx), tc * (th - s) ** tp, tchi, np.full(s.size, n_trib + 1 + t)))
        size += s.size
    down, step, area, chi, link = (np.concatenate(v) for v in zip(*parts))
    return {"down": down, "step": step, "area": area, "chi": chi, "z": ks * chi, "link": link}


def steady_networks(rng: np.random.Generator, *, theta: float, ks: list[float], n_trib: int = 6,
                    dx: float = 30.0) -> dict:
    """Several basins (one per entry of ``ks``) side by side; ``basin`` numbers them, ``link`` is unique."""
    out: dict[str, list] = {k: [] for k in ("down", "step", "area", "chi", "z", "link", "basin")}
    offset, links = 0, 0
    for b, k in enumerate(ks):
        one = steady_basin(rng, theta=theta, ks=k, dx=dx, n_trib=n_trib)
        out["down"].append(np.where(one["down"] >= 0, one["down"] + offset, -1))
        for key in ("step", "area", "chi", "z"):
            out[key].append(one[key])
        out["link"].append(one["link"] + links)
        out["basin"].append(np.full(one["z"].size, b))
        offset += one["z"].size
        links += int(one["link"].max()) + 1
    return {k: np.concatenate(v) for k, v in out.items()}


def tree_error(down: np.ndarray, step: np.ndarray, error: DemError, rng: np.random.Generator) -> np.ndarray:
    """Exponentially correlated error along the flow paths of a receivers-first network."""
    phi = error.correlation(step)
    e = np.empty(down.size)
    w = rng.standard_normal(down.size)
    for k in range(down.size):
        d = down[k]
        e[k] = w[k] if d < 0 else phi[k] * e[d] + np.sqrt(1.0 - phi[k] ** 2) * w[k]
    return error.sigma_m * e


def hack_channel(n: int, dx: float = 30.0, theta: float = 0.45) -> tuple[np.ndarray, np.ndarray]:
    """Distance and χ (closed form) of one channel with A = 0.5 (L + 600 − x)² (Hack 1957)."""
    x = np.arange(n) * dx
    return x, closed_form_chi(x, 0.5, x[-1] + 600.0, 2.0, theta)


def ar1_length(phi: float, dx: float) -> float:
    """Correlation length (m) whose exponential correlation between nodes dx apart is φ."""
    return 0.0 if phi <= 0 else -dx / float(np.log(phi))


def profile_case(rng: np.random.Generator, *, n: int, error: DemError, kind: str = "none", size: float = 0.0,
                 at: int | None = None, ks: float = 60.0, dx: float = 30.0) -> dict:
    """One steady channel z = ks·χ (closed-form χ) with DEM error, and optionally one knickpoint at node ``at``.

    ``kind="step"``: the reach above ``at`` is raised by ``size`` metres; ``kind="slope"``: ksn
    below ``at`` is ``ks · (1 + size)`` (a steeper lower reach, as after a base-level fall;
    Whipple & Tucker 1999), above it ``ks``.
    """
    x, chi = hack_channel(n, dx)
    z = ks * chi
    if kind == "step":
        z = z + np.where(np.arange(n) >= at, size, 0.0)
    elif kind == "slope":
        z = np.where(chi < chi[at], ks * (1 + size) * chi, ks * (1 + size) * chi[at] + ks * (chi - chi[at]))
    elif kind != "none":
        raise ValueError(kind)
    return {"x": x, "chi": chi, "z": z + error.sample_profile(x, rng), "at": at}


# --- knickpoint detection harness, shared by tests/profiles/test_segments.py and the benchmark ---

DX = 30.0
MIN_REACH = 20  # nodes on each side of a planted knickpoint


def detect(case: dict, error: DemError, tolerance: int = 10) -> tuple[bool, bool]:
    """(any significant knickpoint, one within ``tolerance`` nodes of the planted one)."""
    return detect_all(case, error, (tolerance,))[:2]


def detect_all(case: dict, error: DemError, tolerances: tuple[int, ...]) -> tuple:
    """Segment and test one profile case under ``error``: (any significant knickpoint, then per
    tolerance whether one lies within that many nodes of the planted one)."""
    seg = segment_profile(case["chi"], case["z"], distance_m=case["x"], error=error)
    found = [b["node"] for b in breaks_of(seg, case["chi"], case["z"], min_nodes=8, distance_m=case["x"], error=error)
             if b["p_value"] < KNICKPOINT_ALPHA]
    return (bool(found),) + tuple(case["at"] is not None and any(abs(k - case["at"]) <= t for k in found)
                                  for t in tolerances)


def draw_error(rng: np.random.Generator, family: str) -> DemError:
    """σ 0.5-2 m; white, or AR(1) with φ 0.5-0.9 between nodes DX apart (the issue's benchmark range)."""
    sigma = float(rng.uniform(0.5, 2.0))
    if family == "white":
        return DemError(sigma, 0.0)
    return DemError(sigma, ar1_length(float(rng.uniform(0.5, 0.9)), DX))
