"""River profiles of both sides of a divide: χ, θ, streams, ksn and knickpoints, in one pass."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from divides.errors import ParameterError
from divides.profiles import _profile_kernels as _k
from divides.profiles.chi import ChiWeights, integrate_chi
from divides.profiles.concavity import (
    REFERENCE_THETA,
    bounded_by_data,
    concavity_by_collinearity,
    concavity_by_slope_area,
)
from divides.profiles.knickpoints import KNICKPOINT_ALPHA, breaks_of, celerity_status, false_discovery_filter
from divides.profiles.segments import Segmentation, segment_profile
from divides.profiles.steepness import stream_slopes
from divides.profiles.streams import longest_path_streams
from divides.terrain.channels import Channels
from divides.terrain.dem_error import DemError
from divides.terrain.sides import BaseLevel, Sides

__all__ = ["Stream", "ProfileAnalysis", "analyse_profiles", "network_concavity"]


@dataclass(frozen=True, eq=False)
class Stream:
    """One stream (trunk or tributary) of a side, downstream to upstream.

    Attributes
    ----------
    side : str
        ``"a"`` or ``"b"``.
    nodes : ndarray of int
        Channel positions, downstream first (a tributary starts at its junction).
    segmentation : Segmentation
        Fit of z against χ over ``nodes``.
    """

    side: str
    nodes: np.ndarray
    segmentation: Segmentation


@dataclass(frozen=True, eq=False)
class ProfileAnalysis:
    """χ, concavity, steepness and knickpoints of the channels on both sides.

    Per-cell arrays are aligned with ``channels.cells``.

    Attributes
    ----------
    theta : float
        Concavity used for χ and ksn.
    theta_source : str
        ``"user"``, ``"reference"`` or ``"collinearity"``.
    concavity : dict of ConcavityEstimate
        ``"a"``, ``"b"``, ``"both"`` (collinearity, each network scored as its own
        basin and the basins combined) and ``"slope_area"`` (both sides).
    chi : ndarray
        χ (m) of channel cells at or above the base level; NaN elsewhere.
    chi_outlet : ndarray
        χ (m) of every channel cell of either side, integrated from its own network's
        outlet (NaN off the sides). Knickpoints are searched on it, below the common base
        level too; differences along a stream are the same as those of ``chi``.
    side : ndarray of int8
        1 for side a, 2 for side b, 0 for other channel cells.
    ksn, ksn_se : ndarray
        ksn (m^(2θ)) of each cell's χ–z segment and its standard error.
    ksn_slope_area : ndarray
        S · A^θ with S the smoothed channel gradient, for comparison.
    streams : list of Stream
        Streams above the common base level (ksn per cell, χ plots).
    knickpoints : list of dict
        Significant knickpoints, searched on every channel of each side from its own
        network outlet (a side lowered by a base-level fall keeps its knickpoints below
        the common base level). Keys of :func:`divides.profiles.knickpoints.breaks_of`,
        with ``chi`` the χ from the own outlet (:attr:`chi_outlet`), plus ``chi_base``
        (χ from the common base level, NaN below it), ``head_position`` (channel head
        at the top of the longest path above the knickpoint), ``q_value`` (p adjusted
        for the number of breaks tested, Benjamini & Hochberg 1995), ``celerity_defined``
        and ``celerity_note`` (see :func:`divides.profiles.knickpoints.celerity_status`),
        ``side``, ``position``, ``cell``, ``x``, ``y``, ``elevation_m``, ``area_m2``,
        ``distance_to_divide_m``.
    n_candidate_breaks : int
        Breaks found by segmentation before significance and artefact filters.
    """

    channels: Channels
    base: BaseLevel
    theta: float
    theta_source: str
    a0: float
    concavity: dict
    chi: np.ndarray
    side: np.ndarray
    ksn: np.ndarray
    ksn_se: np.ndarray
    ksn_slope_area: np.ndarray
    streams: list = field(repr=False)
    chi_outlet: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)
    knickpoints: list = field(default_factory=list)
    n_candidate_breaks: int = 0
    weights: dict = field(default_factory=dict)

    def median_ksn(self, side: str, *, source: str = "segments") -> float:
        """Median ksn over the side's channel cells (NaN if none).

        ``source="segments"`` (the χ–z fits) or ``"slope_area"`` (smoothed S · A^θ, for comparison).
        """
        values = self.ksn if source == "segments" else self.ksn_slope_area
        sel = (self.side == (1 if side == "a" else 2)) & np.isfinite(values)
        return float(np.median(values[sel])) if sel.any() else float("nan")

    def grid(self, values: np.ndarray) -> np.ndarray:
        """A per-channel-cell array put on the DEM grid (NaN off the channels)."""
        flow = self.channels.flow
        out = np.full(flow.receivers.size, np.nan)
        out[self.channels.cells] = values
        return out.reshape(flow.shape)

    def summary(self) -> dict:
        """JSON-ready figures."""
        return {
            "theta": {"value": self.theta, "source": self.theta_source,
                      **{k: v.to_dict() for k, v in self.concavity.items()}},
            "ksn": {"a": _none(self.median_ksn("a")), "b": _none(self.median_ksn("b"))},
            "ksn_slope_area": {"a": _none(self.median_ksn("a", source="slope_area")),
                               "b": _none(self.median_ksn("b", source="slope_area"))},
            "n_streams": len(self.streams),
            "n_knickpoints": len(self.knickpoints),
            "n_candidate_breaks": self.n_candidate_breaks,
            "weights": self.weights,
        }


def _none(v: float) -> float | None:
    return float(v) if np.isfinite(v) else None


def analyse_profiles(
    channels: Channels,
    sides: Sides,
    base: BaseLevel,
    *,
    theta: float | str = REFERENCE_THETA,
    a0: float = 1.0,
    weights: ChiWeights | None = None,
    min_nodes: int = 8,
    max_segments: int = 6,
    vertical_resolution_m: float = 1.0,
    dem_error: DemError | None = None,
    n: float = 1.0,
    n_boot: int = 100,
    seed: int = 0,
    chi_only: bool = False,
) -> ProfileAnalysis:
    """Analyse the river profiles of both sides of a divide.

    Parameters
    ----------
    channels : Channels
    sides : Sides
    base : BaseLevel
        Common base level; only channels at or above it are analysed.
    theta : float or "auto"
        Concavity for χ and ksn. ``"auto"`` uses the collinearity estimate of
        both sides, each network scored against its own trunk and the networks
        combined (falling back to the reference 0.45 when it cannot be made or
        the data do not bound it, :func:`~divides.profiles.concavity.bounded_by_data`);
        the default is the reference value 0.45 (common practice).
    a0 : float
        Reference area (m²).
    weights : ChiWeights, optional
        Runoff, erodibility and uplift weighting of χ.
    min_nodes, max_segments : int
        Segmentation limits (nodes per segment, segments per stream).
    vertical_resolution_m : float
        σ (m) of white DEM error, used when ``dem_error`` is not given.
    dem_error : DemError, optional
        DEM error model (σ and correlation length). Segmentation and knickpoint
        tests are generalised least squares under it; steps smaller than its σ
        are not knickpoints.
    n : float
        Slope exponent of the stream-power law, for whether each knickpoint has
        a defined upstream speed (``celerity_defined``, ``celerity_note``).
    n_boot : int
        Bootstrap resamples for the concavity intervals (with fewer than 2 there is no interval, so ``"auto"``
        takes the reference 0.45).
    seed : int
        Random seed.
    chi_only : bool
        With a numeric ``theta``: χ only, the same as in the full analysis, without
        concavity, ksn, segmentation or knickpoints (empty), for passes that read χ
        alone (an assessment's robustness re-runs).

    Returns
    -------
    ProfileAnalysis
    """
    if not (np.isfinite(vertical_resolution_m) and vertical_resolution_m >= 0):
        raise ParameterError(f"vertical resolution must be >= 0 m; got {vertical_resolution_m!r}")
    error = dem_error if dem_error is not None else DemError(float(vertical_resolution_m), 0.0)
    flow = channels.flow
    down, step = channels.down, channels.step
    area = channels.area if weights is None or weights.discharge is None else \
        weights.discharge.ravel()[channels.cells]
    factor = 1.0 if weights is None else weights.factor
    if not np.isscalar(factor):
        factor = np.asarray(factor).ravel()[channels.cells]
    z = channels.elevation - base.elevation_m
    keep = base.kept_a | base.kept_b
    side = np.where(base.kept_a, 1, np.where(base.kept_b, 2, 0)).astype(np.int8)
    groups = channels.link
    # Each network that crosses the base level separately (e.g. the many basins draining
    # off one DEM edge) has its own χ = 0 node; concavity is about the shape of profiles,
    # so each network is measured from its own base node.
    root = _k.network_root(down, keep)
    z_own = np.where(root >= 0, z - z[np.maximum(root, 0)], np.nan)

    if chi_only and not isinstance(theta, str):
        return _chi_only(channels, base, float(theta), a0, area, factor, keep, side, weights)
    conc = {}
    for name, sel in (("a", base.kept_a), ("b", base.kept_b), ("both", keep)):
        # each network (root) is one basin, scored against its own trunk; never one pooled cloud
        conc[name] = concavity_by_collinearity(down, step, area, z_own, sel, groups, basins=root, a0=a0,
                                               weight=factor, n_boot=n_boot, seed=seed)

    if isinstance(theta, str):
        if theta != "auto":
            raise ParameterError(f"theta must be a number or 'auto'; got {theta!r}")
        if bounded_by_data(conc["both"]):  # not an estimate at the edge of the scan or with a loose interval
            theta_value, source = conc["both"].value, "collinearity"
        else:
            theta_value, source = REFERENCE_THETA, "reference"
    else:
        theta_value, source = float(theta), ("user" if float(theta) != REFERENCE_THETA else "reference")

    # χ = 0 where each channel crosses the common base level (interpolated between nodes)
    chi = integrate_chi(down, step, area, theta=theta_value, a0=a0, keep=keep, weight=factor,
                        start_m=base.start_m if base.start_m.size == channels.size else None)

    ksn = np.full(channels.size, np.nan)
    ksn_se = np.full(channels.size, np.nan)
    slope_all = _channel_slopes(channels, keep)
    with np.errstate(invalid="ignore"):
        ksn_sa = slope_all * (area / a0) ** theta_value
    streams: list[Stream] = []
    for side_name, kept in (("a", base.kept_a), ("b", base.kept_b)):
        for nodes, tributary in longest_path_streams(down, step, kept):
            if nodes.size < 2:
                continue  # a lone base node: nothing to fit
            seg = segment_profile(chi[nodes], z[nodes], distance_m=_along(step, nodes), error=error,
                                  min_nodes=min_nodes, max_segments=max_segments)
            streams.append(Stream(side_name, nodes, seg))
            first = 1 if tributary else 0  # a tributary's junction node belongs to the stream it joins
            own = nodes[first:]
            which = seg.segment_of(np.arange(first, nodes.size))
            ksn[own] = seg.slope[which]
            ksn_se[own] = seg.slope_se[which]

    # Knickpoints are searched on every channel of each side, from its own network outlet: a side
    # lowered by a base-level fall has most of its steepened reach below the common base level
    # (Whipple & Tucker 1999). Only χ differences along a stream matter to segmentation and arrival
    # times, so χ from each network's outlet serves; the contrasts keep the common base.
    on_a = sides.a.mask.ravel()[channels.cells]
    on_b = sides.b.mask.ravel()[channels.cells]
    chi_outlet = integrate_chi(down, step, area, theta=theta_value, a0=a0, keep=on_a | on_b, weight=factor)
    candidates: list[tuple[str, np.ndarray, dict]] = []
    for side_name, on in (("a", on_a), ("b", on_b)):
        for nodes, _ in longest_path_streams(down, step, on):
            if nodes.size < 2 * min_nodes:
                continue  # too short to hold two segments: no break can be tested
            along = _along(step, nodes)
            seg = segment_profile(chi_outlet[nodes], z[nodes], distance_m=along, error=error,
                                  min_nodes=min_nodes, max_segments=max_segments)
            for brk in breaks_of(seg, chi_outlet[nodes], z[nodes], min_nodes=min_nodes, distance_m=along,
                                 error=error):
                candidates.append((side_name, nodes, brk))

    conc["slope_area"] = concavity_by_slope_area(area[keep], slope_all[keep])

    raw = flow.dem.elevation.ravel()
    cond = flow.conditioned.surface.ravel()
    longest = _k.longest_upstream_path(flow.order, flow.receivers, flow.distance)
    knickpoints = []
    # many streams are tested at once: control the share of false knickpoints (Benjamini & Hochberg 1995)
    significant, q_values = false_discovery_filter(np.array([brk["p_value"] for _, _, brk in candidates]),
                                                   KNICKPOINT_ALPHA)
    for (side_name, nodes, brk), passed, q in zip(candidates, significant, q_values):
        pos = int(nodes[brk["node"]])
        cell = int(channels.cells[pos])
        if not passed:
            continue
        if abs(float(cond[cell]) - float(raw[cell])) > 1e-6:
            continue  # inside a filled or breached reach: an artefact of conditioning
        if brk["kind"] == "step" and abs(brk["step_m"]) < error.sigma_m:
            continue
        defined, note = celerity_status(brk["kind"], brk["ksn_below"], brk["ksn_above"], n)
        r, c = divmod(cell, flow.shape[1])
        x, y = flow.dem.xy(r, c)
        # χ from the common base differs from χ from the own outlet by one constant per network
        knickpoints.append({
            **brk, "chi_base": float(brk["chi"] - chi_outlet[pos] + chi[pos]), "head_position": int(nodes[-1]),
            "q_value": float(q), "celerity_defined": defined, "celerity_note": note,
            "side": side_name, "position": pos, "cell": cell, "x": float(x), "y": float(y),
            "elevation_m": float(raw[cell]), "area_m2": float(channels.area[pos]),
            "distance_to_divide_m": float(longest[cell]),
        })
    return ProfileAnalysis(
        channels=channels, base=base, theta=float(theta_value), theta_source=source, a0=float(a0),
        concavity=conc, chi=chi, side=side, ksn=ksn, ksn_se=ksn_se, ksn_slope_area=ksn_sa, streams=streams,
        chi_outlet=chi_outlet, knickpoints=knickpoints, n_candidate_breaks=len(candidates),
        weights={} if weights is None else weights.description,
    )


def _chi_only(channels: Channels, base: BaseLevel, theta: float, a0: float, area, factor, keep, side,
              weights) -> ProfileAnalysis:
    """χ from the common base level as in :func:`analyse_profiles`; every other part empty."""
    chi = integrate_chi(channels.down, channels.step, area, theta=theta, a0=a0, keep=keep, weight=factor,
                        start_m=base.start_m if base.start_m.size == channels.size else None)
    empty = np.full(channels.size, np.nan)
    return ProfileAnalysis(
        channels=channels, base=base, theta=theta, theta_source="user" if theta != REFERENCE_THETA else "reference",
        a0=float(a0), concavity={}, chi=chi, side=side, ksn=empty, ksn_se=empty.copy(), ksn_slope_area=empty.copy(),
        streams=[], chi_outlet=empty.copy(), knickpoints=[], n_candidate_breaks=0,
        weights={} if weights is None else weights.description,
    )


def _along(step: np.ndarray, nodes: np.ndarray) -> np.ndarray:
    """Distance (m) along a stream from its first node, for the error model."""
    return np.r_[0.0, np.cumsum(step[nodes[1:]])]


def _channel_slopes(channels: Channels, keep: np.ndarray) -> np.ndarray:
    """Smoothed channel gradient of every kept cell, stream by stream (NaN elsewhere)."""
    slope = np.full(channels.size, np.nan)
    half_window = 3.0 * float(np.max(channels.flow.dem.cell_size_m))
    dist, z = channels.distance_upstream, channels.elevation
    for nodes, tributary in longest_path_streams(channels.down, channels.step, keep):
        if nodes.size >= 3:
            first = 1 if tributary else 0
            slope[nodes[first:]] = stream_slopes(dist[nodes], z[nodes], half_window_m=half_window)[first:]
    return slope


def network_concavity(channels: Channels, *, a0: float = 1.0, n_boot: int = 100, seed: int = 0) -> dict:
    """Concavity of a DEM's whole channel network, each outlet's network from its own outlet.

    Returns
    -------
    dict
        ``"collinearity"`` and ``"slope_area"`` :class:`ConcavityEstimate` objects.
    """
    keep = np.ones(channels.size, dtype=bool)
    root = _k.network_root(channels.down, keep)
    z = channels.elevation - channels.elevation[root]
    return {
        "collinearity": concavity_by_collinearity(channels.down, channels.step, channels.area, z, keep,
                                                  channels.link, basins=root, a0=a0, n_boot=n_boot, seed=seed),
        "slope_area": concavity_by_slope_area(channels.area, _channel_slopes(channels, keep)),
    }
