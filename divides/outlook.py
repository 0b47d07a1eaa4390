"""Forecast: run the forward model on a real DEM, with parameters from an assessment, and track its divide.

This module joins two rooms that do not know each other: the assessment
(:mod:`divides.assess`) and the forward model (:mod:`divides.model`). It sits
above both, so the model never imports the assessment.

The assessment gives the concavity θ (with an interval), the slope exponent n
and a calibration of erodibility K (from a measured erosion rate, a given K
or a dated knickpoint). The present surface is the starting state; its open
edges are held at their present elevations, and uplift and hillslope
diffusivity are set so that the present surface is the model's steady state
(see :func:`forecast`). The model runs
``years`` forward for a central parameter set and for an ensemble over the
uncertainty of K, θ, n and the diffusivity D; the divide between the two
sides is tracked through time. The result is a screening estimate: modelled timescales depend on the
solver, time step and grid (Forte & Barnhart 2024, ESurf 12) and on the
calibration.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from divides._jsonable import to_jsonable
from divides.assess.missing_data import interior_nodata_note
from divides.assess.verdict import CAUTION
from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.terrain.voids import fill_voids
from divides.model.forcing import check_positive, open_edge
from divides.model.forward_run import (
    MAX_CELLS,
    MIN_STEPS,
    block_mean,
    ForecastRun,
    RunSetup,
    coarsen,
    prepare,
    run_model,
    slopes,
)
from divides.terrain.sides import SideSpec

if TYPE_CHECKING:  # pragma: no cover - for type hints only
    from divides.assess.assessment import Assessment

__all__ = [
    "SCHEMA",
    "MAX_CELLS",
    "DEFAULT_DIFFUSIVITY",
    "UPLIFT_MODES",
    "TIMESCALE_CAUTION",
    "NEEDS_CALIBRATION",
    "ForecastRun",
    "Forecast",
    "coarsen",
    "forecast",
]

#: Identifies the layout of :meth:`Forecast.to_dict` (``forecast.json``).
SCHEMA = "divides.forecast/1"

#: Default hillslope diffusivity: None, fitted from the DEM with the uplift so that the present surface is the
#: model's steady state (:func:`divides.model.forward_run.steady_balance`).
DEFAULT_DIFFUSIVITY = None

#: How uplift balances the present landscape: one rate for the whole grid, or one per side.
UPLIFT_MODES = ("uniform", "sides")

#: Every forecast carries this besides :data:`divides.assess.verdict.CAUTION`.
TIMESCALE_CAUTION = (
    "Modelled timescales depend on the solver, the time step and the grid (Forte & Barnhart 2024, "
    "ESurf 12) and on the calibration of erodibility: read the years and metres as a screening estimate, "
    "not a prediction."
)

#: The message when no calibration of erosion was given.
NEEDS_CALIBRATION = (
    "a forecast needs erosion rates in metres per year: give a measured erosion rate of either side "
    "(erosion_rate_a_mm_yr / erosion_rate_b_mm_yr; --erosion-rate-a/-b in mm/yr), an erodibility K "
    "(erodibility; --erodibility-k) or the age of a knickpoint (knickpoint_age_years)"
)

#: How the divide's displacement is measured (``parameters["measure"]``).
MEASURE = "net area exchanged between the sides / length of the present divide still between them"

#: Ensemble members draw n log-uniformly within a factor 1.5 of the assessment's n: n is seldom
#: known better than that; field estimates span about 0.5-4 (from memory; Lague 2014, ESPL 39).
N_FACTOR = 1.5

#: Ensemble members draw D log-uniformly within a factor 10 of the given diffusivity: values quoted for
#: soil-mantled hillslopes span about 1e-4 to 1e-1 m²/yr (from memory; e.g. Fernandes & Dietrich 1997,
#: Water Resour. Res. 33; Martin 2000, ESPL 25).
D_FACTOR = 10.0

#: Ensemble members draw a fitted D log-uniformly within this factor of the fit: the fit's spread about the
#: true D on the training part of the model benchmark (docs/validation.md).
FIT_D_FACTOR = 1.6

_MAX_STEPS = 400
_CALIBRATION_OPTIONS = ("erosion_rate_a_mm_yr", "erosion_rate_b_mm_yr", "erodibility", "knickpoint_age_years")


# ------------------------------------------------------------------ results
@dataclass(frozen=True, eq=False)
class Forecast:
    """Where the divide between two sides is forecast to be after ``years``.

    Displacements are the mean distance the divide moves (m), positive into
    side b (side a gains ground), negative into side a.

    Attributes
    ----------
    years : float
    side_a, side_b : str
        The side SPECs.
    dem : Dem
        The model grid at the start (the DEM, block-averaged if it was large).
    factor : int
        Block size of the averaging (1: the DEM's own grid).
    source_shape : (int, int)
        Shape of the DEM given.
    present : list of DivideLine
        The divide on the model grid at the start.
    present_length_m : float
    central : ForecastRun
        Best-estimate parameters (median K, θ of the assessment).
    members : tuple of ForecastRun
        The ensemble over K, θ, n and D (the central run excluded).
    parameters : dict
        Effective parameters (JSON-ready).
    notes : list of str
        What was assumed or changed, in plain words.
    assessment : dict
        The assessment's verdict and rate, for comparison.
    """

    years: float
    side_a: str
    side_b: str
    dem: Dem
    factor: int
    source_shape: tuple[int, int]
    present: list
    present_length_m: float
    central: ForecastRun
    members: tuple
    parameters: dict
    notes: list = field(default_factory=list)
    assessment: dict = field(default_factory=dict)

    @property
    def times(self) -> np.ndarray:
        """Years since the start at which the divide was measured."""
        return self.central.times

    @property
    def runs(self) -> tuple:
        """The central run and the ensemble members."""
        return (self.central, *self.members)

    @property
    def band(self) -> dict[str, np.ndarray]:
        """``low``, ``best``, ``high`` displacement (m) through time.

        ``best`` is the central run; ``low`` and ``high`` the least and
        greatest displacement among all runs, the central one included
        (equal to ``best`` without members).
        """
        best = self.central.displacement_m
        stack = np.vstack([r.displacement_m for r in self.runs])
        # fmin/fmax skip NaN (a run whose divide left the grid) without warnings
        return {"low": np.fmin.reduce(stack, axis=0), "best": best.copy(), "high": np.fmax.reduce(stack, axis=0)}

    def _extreme(self, which: str) -> ForecastRun:
        final = np.array([r.displacement_m[-1] for r in self.runs])
        if np.all(np.isnan(final)):
            return self.central
        pick = np.nanargmin(final) if which == "low" else np.nanargmax(final)
        return self.runs[int(pick)]

    @property
    def low_run(self) -> ForecastRun:
        """The run with the least final displacement (its divide line is the ``low`` band)."""
        return self._extreme("low")

    @property
    def high_run(self) -> ForecastRun:
        """The run with the greatest final displacement (its divide line is the ``high`` band)."""
        return self._extreme("high")

    @property
    def resolution_m(self) -> float:
        """Half the model cell size: smaller displacements are not resolved."""
        return 0.5 * float(min(np.min(self.dem.dx), np.min(self.dem.dy)))

    @property
    def ensemble(self) -> dict[str, int]:
        """How many runs move the divide into side a, into side b, or less than half a cell either way.

        Keys ``into_a``, ``into_b`` (sign of the final displacement), ``unresolved`` (of those, how many
        by less than :attr:`resolution_m`), ``lost`` (runs whose divide left the grid) and ``runs``.
        """
        final = np.array([r.displacement_m[-1] for r in self.runs])
        ok = np.isfinite(final)
        return {"runs": int(final.size), "into_a": int(np.sum(final[ok] < 0)), "into_b": int(np.sum(final[ok] > 0)),
                "unresolved": int(np.sum(np.abs(final[ok]) < self.resolution_m)), "lost": int(np.sum(~ok))}

    @property
    def moves_toward(self) -> str:
        """What the runs say: ``"a"`` or ``"b"`` (the side the divide moves into), ``"stable"`` or ``"undetermined"``.

        A direction when every run moves the divide that way and the central
        run by at least half a model cell; ``"stable"`` when every run keeps it
        within half a cell; otherwise (runs disagree, or only some resolve a
        move) ``"undetermined"``.
        """
        e = self.ensemble
        best = float(self.central.displacement_m[-1])
        if e["lost"] or not np.isfinite(best):
            return "undetermined"
        if e["unresolved"] == e["runs"]:
            return "stable"
        if abs(best) >= self.resolution_m:
            if e["into_b"] == e["runs"]:
                return "b"
            if e["into_a"] == e["runs"]:
                return "a"
        return "undetermined"

    @property
    def bands_agree(self) -> bool:
        """True when every run moves the divide the same way (by any amount)."""
        e = self.ensemble
        return bool(e["into_a"] == e["runs"] or e["into_b"] == e["runs"])

    @property
    def agrees_with_assessment(self) -> bool | None:
        """True or False when both the forecast and the assessment give a direction or "stable"; None otherwise.

        Also None when the assessment gives a direction and every run moves the divide that way by
        less than half a model cell: the forecast can neither confirm nor refute it.
        """
        said = self.assessment.get("moves_toward")
        ours = self.moves_toward
        if said not in ("a", "b", "stable") or ours not in ("a", "b", "stable") or self._too_slow_to_tell():
            return None
        return said == ours

    def _too_slow_to_tell(self) -> bool:
        said = self.assessment.get("moves_toward")
        e = self.ensemble
        return (said in ("a", "b") and self.moves_toward == "stable" and self.bands_agree
                and said == ("b" if e["into_b"] else "a"))

    def _names(self) -> dict[str, str]:
        return {"a": f"side a ({self.side_a})", "b": f"side b ({self.side_b})"}

    def _headline(self) -> str:
        e, names = self.ensemble, self._names()
        final = {k: v[-1] for k, v in self.band.items()}
        spread = f"{_sig(final['low'])} to {_sig(final['high'])} m over the {e['runs']} runs, positive into side b"
        years = f"In {self.years:,.0f} years"
        toward = self.moves_toward
        if e["runs"] == 1:
            if toward == "stable":
                return f"{years} the divide stays within half a model cell ({_sig(self.resolution_m)} m) of its " \
                       "present position (one run: no ensemble range)."
            if toward in ("a", "b"):
                return f"{years} the divide moves about {_sig(abs(final['best']))} m into {names[toward]} " \
                       "(one run: no ensemble range)."
            return f"{years} the divide's motion could not be measured: it left the model grid."
        if toward == "stable":
            text = f"{years} every run keeps the divide within half a model cell ({_sig(self.resolution_m)} m) of " \
                   f"its present position ({spread})"
            if self.bands_agree:
                side = "b" if e["into_b"] else "a"
                text += f"; all of them move it slightly into {names[side]}, by less than the grid resolves"
            return text + "."
        if toward in ("a", "b"):
            text = f"{years} the divide moves about {_sig(abs(final['best']))} m into {names[toward]} (central run; " \
                   f"{spread}): every run moves it that way"
            if e["unresolved"]:
                text += f", {e['unresolved']} of them by less than half a model cell ({_sig(self.resolution_m)} m)"
            return text + "."
        if self.bands_agree:
            side = "b" if e["into_b"] else "a"
            return f"{years} every run moves the divide into {names[side]}, but the central run by less than half " \
                   f"a model cell ({_sig(self.resolution_m)} m), which the grid does not resolve ({spread}); " \
                   "no direction is given."
        parts = [f"{e['into_b']} into side b", f"{e['into_a']} into side a"]
        if e["lost"]:
            parts.append(f"{e['lost']} lost the divide off the grid")
        return f"{years} the runs do not agree on the direction ({', '.join(parts)}; {spread}); " \
               "no direction is given."

    def _comparison(self) -> str | None:
        said = self.assessment.get("moves_toward")
        if said is None:
            return None
        names = self._names()
        conf = self.assessment.get("confidence")
        conf_text = "" if conf is None else f" (confidence {_sig(conf)})"
        verdict = {"a": f"moves into {names['a']}", "b": f"moves into {names['b']}", "stable": "is stable",
                   "undetermined": "cannot be determined from the DEM"}.get(said, str(said))
        agree = self.agrees_with_assessment
        rates = self._rates()
        if agree is None and self._too_slow_to_tell():
            return f"The assessment of the same DEM says the divide {verdict}{conf_text}; every run moves it that " \
                   f"way too, but by less than half a model cell, so the forecast can neither confirm nor refute " \
                   f"it on this grid.{rates}"
        if agree is None:
            return f"The assessment of the same DEM says the divide {verdict}{conf_text}; with no direction on one " \
                   "side or the other, the two cannot be compared."
        if agree:
            return f"The assessment of the same DEM agrees: the divide {verdict}{conf_text}.{rates}"
        return f"The forecast and the assessment of the same DEM disagree: the assessment says the divide " \
               f"{verdict}{conf_text}. The forecast rests on the calibration of erodibility, the model's uplift and " \
               "its fixed edges, the assessment on present contrasts across the divide: check both before relying " \
               f"on either.{rates}"

    def _rates(self) -> str:
        """Both rates side by side (mm/yr, positive into side b), or an empty string."""
        given = self.assessment.get("rate_mm_per_yr")
        if not given or self.assessment.get("moves_toward") not in ("a", "b"):
            return ""
        sign = 1.0 if self.assessment["moves_toward"] == "b" else -1.0
        vals = sorted(sign * float(given[k]) for k in ("low", "high"))
        lo, best, hi = vals[0], sign * float(given["best"]), vals[-1]
        final = {k: 1e3 * v[-1] / self.years for k, v in self.band.items()}
        return f" Rates, positive into side b: assessment {_sig(best)} mm/yr (95 % interval {_sig(lo)} to " \
               f"{_sig(hi)}), forecast {_sig(final['best'])} mm/yr ({_sig(final['low'])} to " \
               f"{_sig(final['high'])} over the runs)."

    def text(self) -> str:
        """The forecast in plain words (several lines)."""
        final = {k: v[-1] for k, v in self.band.items()}
        lines = [self._headline()]
        rate = {k: 1e3 * v / self.years for k, v in final.items()}
        lines.append(f"Mean rate {_sig(rate['best'])} mm/yr (central run; {_sig(rate['low'])} to "
                     f"{_sig(rate['high'])} over the runs; positive: into side b).")
        comparison = self._comparison()
        if comparison:
            lines.append(comparison)
        lines += self.notes
        lines += [TIMESCALE_CAUTION, CAUTION]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        """JSON-ready document (schema :data:`SCHEMA`)."""
        band = self.band
        final = {k: _finite(v[-1]) for k, v in band.items()}
        rate = {k: (None if v is None else 1e3 * v / self.years) for k, v in final.items()}
        dem = self.dem
        return to_jsonable({
            "schema": SCHEMA,
            "dem": {"path": dem.path, "crs": None if dem.crs is None else dem.crs.to_string(),
                    "shape": list(self.source_shape), "geographic": dem.geographic},
            "model_grid": {"shape": list(dem.shape), "cell_size_m": list(dem.cell_size_m),
                           "block_averaged_by": self.factor},
            "sides": {"a": self.side_a, "b": self.side_b},
            "years": self.years,
            "moves_toward": self.moves_toward,
            "bands_agree": self.bands_agree,
            "ensemble": self.ensemble,
            "agrees_with_assessment": self.agrees_with_assessment,
            "comparison": self._comparison(),
            "text": self._headline(),
            "displacement_m": final,
            "rate_mm_per_yr": rate,
            "resolution_m": self.resolution_m,
            "present_divide_length_m": self.present_length_m,
            "track": {"times_yr": self.times, **{k: v for k, v in band.items()}},
            "parameters": self.parameters,
            "runs": [r.summary() for r in self.runs],
            "assessment": self.assessment,
            "notes": self.notes,
            "timescale_caution": TIMESCALE_CAUTION,
            "caution": CAUTION,
        })


def _sig(v: Any, digits: int = 2) -> str:
    """``v`` to two significant figures, with thousands separators for large values.

    >>> _sig(444.17), _sig(0.01613), _sig(-1234.0), _sig(0.0), _sig(2.0), _sig(0.09)
    ('440', '0.016', '-1,200', '0', '2.0', '0.090')
    """
    v = float(v)
    if not math.isfinite(v):
        return "n/a"
    if v == 0:
        return "0"
    r = float(f"{v:.{digits}g}")
    return f"{r:,.0f}" if abs(r) >= 10 ** (digits - 1) else f"{r:#.{digits}g}"


def _finite(v: Any) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


# ------------------------------------------------------------------ parameters
@dataclass(frozen=True)
class _Calibrated:
    """Erodibility of each member from the calibration, under the model's own erosion law.

    A measured erosion rate is read as the mean over its side (as a basin-averaged
    cosmogenic rate is), so K = E / mean(A^m S^n) over that side's cells of the model
    grid; a given K (or one from a dated knickpoint) fixes the mean erosion rate of both
    sides at the central θ and n, which each member's K then reproduces at its own.
    """

    source: str
    theta0: float
    n: float
    rates: tuple[float | None, float | None]  # mean erosion rates (m/yr) of a and b, where measured
    k0: float | None  # K itself (a given K or a dated knickpoint), else None
    spread: np.ndarray | None  # K samples over their median (None: taken as exact)
    area: np.ndarray  # per model cell, drainage area (m²)
    slope: np.ndarray  # per model cell, gradient to the receiver
    side: np.ndarray  # per model cell, 1 = a, 2 = b, 0 = neither

    def _power(self, theta: float, n: float, codes: tuple[int, ...]) -> float:
        """Mean of A^m S^n (m = θ n) over the cells of the sides ``codes`` on the model grid."""
        sel = np.isin(self.side, codes)
        value = float(np.mean(self.area[sel] ** (theta * n) * self.slope[sel] ** n)) if sel.any() else 0.0
        if not value > 0:
            names = " and ".join("ab"[c - 1] for c in codes)
            raise ParameterError(f"side {names} has no slope on the model grid to calibrate erodibility from; "
                                 "choose larger basins")
        return value

    def erodibility(self, theta: float, q: float, n: float | None = None) -> tuple[float, float]:
        """K of sides a and b (m^(1-2m)/yr, m = θ n) at concavity θ, slope exponent n (default the
        assessment's) and quantile q of the calibration's K samples."""
        n = self.n if n is None else float(n)
        f = 1.0 if self.spread is None else float(np.quantile(self.spread, q))
        e_a, e_b = self.rates
        if e_a is not None and e_b is not None:
            return e_a / self._power(theta, n, (1,)), e_b / self._power(theta, n, (2,))
        if e_a is not None or e_b is not None:
            code, e = (1, e_a) if e_a is not None else (2, e_b)
            k = f * e / self._power(theta, n, (code,))
            return k, k
        mean_rate = f * self.k0 * self._power(self.theta0, self.n, (1, 2))
        k = mean_rate / self._power(theta, n, (1, 2))
        return k, k


def _calibrated(assessment: Assessment, setup: RunSetup) -> _Calibrated:
    cal = assessment.calibration
    if not cal.available:
        raise ParameterError(NEEDS_CALIBRATION)
    side = np.where(setup.mask_a.ravel(), 1, np.where(setup.mask_b.ravel(), 2, 0))
    common = dict(source=cal.source, theta0=float(assessment.profiles.theta), n=float(assessment.config.n),
                  area=np.asarray(setup.flow.area, dtype=np.float64).ravel(), slope=slopes(setup.flow), side=side)
    if cal.k is None:  # both sides' rates given directly
        rates = (float(np.nanmedian(cal.erosion_a)), float(np.nanmedian(cal.erosion_b)))
        return _Calibrated(**common, rates=rates, k0=None, spread=None)
    k = np.asarray(cal.k, dtype=np.float64)
    k = k[np.isfinite(k) & (k > 0)]
    if k.size == 0:
        raise ParameterError(f"the calibration ({cal.source}) gave no usable erodibility: the calibrated side has "
                             "no channel steepness; calibrate on the other side or give K")
    spread = k / np.median(k) if np.ptp(k) > 0 else None
    if cal.source == "erosion rate of side a":
        return _Calibrated(**common, rates=(float(np.nanmedian(cal.erosion_a)), None), k0=None, spread=spread)
    if cal.source == "erosion rate of side b":
        return _Calibrated(**common, rates=(None, float(np.nanmedian(cal.erosion_b))), k0=None, spread=spread)
    return _Calibrated(**common, rates=(None, None), k0=float(np.median(k)), spread=spread)


def _theta_interval(assessment: Assessment) -> tuple[float, float, str]:
    prof = assessment.profiles
    theta = float(prof.theta)
    est = prof.concavity.get("both")
    if prof.theta_source == "collinearity" and est is not None and np.all(np.isfinite(est.ci95)):
        lo, hi = (float(v) for v in est.ci95)
        return min(lo, theta), max(hi, theta), "95 % interval of the collinearity estimate"
    # common practice: θ is known to about ±0.1 (as in the assessment's robustness re-runs)
    return max(theta - 0.1, 0.5 * theta), theta + 0.1, "θ ± 0.1 (common practice)"


def _design(n_runs: int, seed: int) -> list[tuple[float, float, float, float]]:
    """(quantile of K, position in the θ interval, and in the n and D intervals) of each ensemble
    member: a seeded Latin hypercube, each coordinate in [0, 1)."""
    k = n_runs - 1
    if k <= 0:
        return []
    rng = np.random.default_rng(seed)
    cols = [(rng.permutation(k) + rng.random(k)) / k for _ in range(4)]
    # K quantiles over the central 95 % of the calibration's samples
    return [(0.025 + 0.95 * float(cols[0][i]), float(cols[1][i]), float(cols[2][i]), float(cols[3][i]))
            for i in range(k)]


def _member_d(d0: float | None, factor: float, q: float) -> dict[str, float | None]:
    """A member's D: the given one spread by ``factor``, or the fitted one times its spread (run_model options)."""
    if d0 is None:
        return {"diffusivity": None, "diffusivity_factor": _spread(1.0, factor, q)}
    return {"diffusivity": _spread(d0, factor, q)}


def _spread(value: float, factor: float, q: float) -> float:
    """``value`` times ``factor`` to the power 2q − 1: log-uniform over [value / factor, value × factor]."""
    return float(value * factor ** (2.0 * q - 1.0))


# ------------------------------------------------------------------ one run
# ------------------------------------------------------------------ entry point
def _check_options(years: Any, n_runs: Any, seed: Any, uplift: Any, diffusivity: Any, max_steps: Any) -> float:
    years_f = check_positive(years, "years", "years")
    if not isinstance(n_runs, (int, np.integer)) or isinstance(n_runs, bool) or n_runs < 1:
        raise ParameterError(f"`n_runs` must be a whole number >= 1 (the central run plus ensemble members); "
                             f"got {n_runs!r}")
    if not isinstance(seed, (int, np.integer)) or isinstance(seed, bool):
        raise ParameterError(f"`seed` must be a whole number; got {seed!r}")
    if not isinstance(uplift, np.ndarray) and uplift not in UPLIFT_MODES:
        raise ParameterError(f"`uplift` must be one of {', '.join(UPLIFT_MODES)} or a raster of uplift rates (m/yr) "
                             f"on the DEM's grid; got {uplift!r}")
    try:
        d = 0.0 if diffusivity is None else float(diffusivity)
    except (TypeError, ValueError):
        d = math.nan
    if not (math.isfinite(d) and d >= 0):
        raise ParameterError(f"`diffusivity` must be a number >= 0 (m²/yr), or None to fit it; got {diffusivity!r}")
    if not isinstance(max_steps, (int, np.integer)) or isinstance(max_steps, bool) or max_steps < MIN_STEPS:
        raise ParameterError(f"`max_steps` must be a whole number >= {MIN_STEPS}; got {max_steps!r}")
    return years_f


def _check_lowering(edge_lowering: Any, closed: Any, assessment: Assessment | None) -> dict[str, float]:
    """Validated ``edge_lowering``: open DEM edges and finite rates in m/yr."""
    if edge_lowering is None:
        return {}
    if not isinstance(edge_lowering, dict):
        raise ParameterError(f"`edge_lowering` must map DEM edges to lowering rates in m/yr, e.g. {{'west': 2e-4}}; "
                             f"got {edge_lowering!r}")
    if assessment is not None:
        closed = assessment.config.closed_edges
    shut = set(closed.replace(" ", "").split(",") if isinstance(closed, str) else (closed or ()))
    out = {}
    for edge, rate in edge_lowering.items():
        if edge not in ("north", "south", "west", "east"):
            raise ParameterError(f"`edge_lowering` names {edge!r}; use north, south, west or east")
        if edge in shut:
            raise ParameterError(f"`edge_lowering` names the closed edge {edge!r}; only an open edge has a base level")
        try:
            r = float(rate)
        except (TypeError, ValueError):
            r = math.nan
        if not math.isfinite(r):
            raise ParameterError(f"the lowering rate of the {edge} edge must be a number of m/yr; got {rate!r}")
        out[edge] = r
    return out


def _uplift_grid(uplift: str | np.ndarray, dem: Dem, factor: int) -> str | np.ndarray:
    """The uplift mode, or an uplift raster checked and block-averaged onto the model grid."""
    if not isinstance(uplift, np.ndarray):
        return uplift
    if uplift.shape != dem.shape:
        raise ParameterError(f"the uplift raster must have the DEM's shape {dem.shape}; got {uplift.shape}")
    field = np.asarray(uplift, dtype=np.float64)
    if not np.all(np.isfinite(field[dem.valid])):
        raise ParameterError("the uplift raster holds non-finite values where the DEM is valid; give m/yr everywhere")
    small = block_mean(np.where(dem.valid, field, np.nan), factor)
    return np.where(np.isfinite(small), small, 0.0)


def _same_side(given: str, spec: SideSpec) -> bool:
    return " ".join(str(given).lower().split()) == " ".join(spec.text.lower().split())


def forecast(
    dem: Dem,
    side_a: str,
    side_b: str,
    *,
    years: float,
    assessment: Assessment | None = None,
    n_runs: int = 9,
    seed: int = 0,
    uplift: str | np.ndarray = "uniform",
    diffusivity: float | None = DEFAULT_DIFFUSIVITY,
    max_cells: int = MAX_CELLS,
    max_steps: int = _MAX_STEPS,
    lonlat: bool = False,
    edge_lowering: dict[str, float] | None = None,
    **assess_options: Any,
) -> Forecast:
    """Forecast where the divide between two sides of a DEM will be after ``years``.

    Parameters
    ----------
    dem : Dem
        The present surface.
    side_a, side_b : str
        Side SPECs as for :func:`divides.assess`: an edge or points ``x,y;x,y``.
    years : float
        How far ahead (years).
    assessment : Assessment, optional
        An assessment of the same DEM and sides; by default one is made with
        ``assess_options`` (robustness re-runs off unless asked for).
    n_runs : int
        Model runs: the central run plus ``n_runs - 1`` ensemble members
        drawn by a seeded Latin hypercube over K (the central 95 % of the
        calibration's samples), θ (its interval), n (log-uniform within a
        factor :data:`N_FACTOR` of the assessment's) and D (log-uniform within
        a factor :data:`D_FACTOR` of ``diffusivity``, or :data:`FIT_D_FACTOR` of the fitted D).
    seed : int
        Seed of the ensemble (and of the assessment when one is made).
    uplift : {"uniform", "sides"}
        ``"uniform"`` (default): one uplift rate everywhere, fitted so that
        the landscape as a whole is in the model's steady state (see Notes);
        the side eroding faster than the other loses height and gives
        ground, as uniform uplift and erodibility assume (Willett et al.
        2014). ``"sides"``: one rate per side (a raster split by side), so
        each side on its own is in balance and motion comes only from where
        the landscape departs from it. Or an array of the DEM's shape: rock
        uplift relative to base level (m/yr), block-averaged with the DEM and
        used as given (Forte & Whipple 2018: an uplift contrast moves a
        divide that χ alone would call stable).
    diffusivity : float, optional
        Hillslope diffusivity D (m²/yr); 0 turns diffusion off. Default: fitted with the uplift so that
        the present surface is the model's steady state (see Notes).
    max_cells : int
        DEMs larger than this along either side are block-averaged first.
    max_steps : int
        Most time steps per run (accuracy falls when the cap is reached; see notes).
    lonlat : bool
        SPEC points are longitude,latitude.
    edge_lowering : dict, optional
        Open edges whose base level keeps falling, and how fast (m/yr,
        positive lowers), e.g. ``{"west": 2e-4}``; other open edges are held
        at their present elevations.
    **assess_options
        Options of :func:`divides.assess` (``theta``, ``n``, ``closed_edges``,
        ``erosion_rate_a_mm_yr``, ``erosion_rate_b_mm_yr``, ``erodibility``,
        ``knickpoint_age_years`` …). One calibration of erosion is required.

    Returns
    -------
    Forecast

    Raises
    ------
    ParameterError
        No calibration of erosion, a bad option, or an assessment that does
        not match the DEM and sides.
    SideError
        The sides cannot be resolved on the model grid.

    Notes
    -----
    K comes from the calibration, under the model's own law E = K A^m S^n on
    the model grid: a measured erosion rate E of a side is read as that
    side's mean (as a basin-averaged cosmogenic rate is), so
    K = E / mean(A^m S^n) over the side's cells; a given K (or one from a
    dated knickpoint) fixes the mean erosion rate of both sides at the
    assessment's θ and n. Each ensemble member's K reproduces that mean rate
    at its own θ and n, scaled by the spread of the calibration's K samples.
    (On the demo, K from the measured 0.70 mm/yr comes out 4.4e-5 against the
    4e-5 that grew it; from the median channel steepness it was 1.7e-5.)
    Uplift U (and D when not given) come from the model's steady state,
    U = K A^m S^n − D ∇²z at every cell (Perron, Kirchner & Dietrich 2009),
    fitted by least squares over both sides' cells of the model grid
    (:func:`divides.model.forward_run.steady_balance`): hilltops, where
    curvature is strongest, pin D (the hilltop balance E = −D ∇²z; Roering
    et al. 2007), channels pin U. Each run refits both at its own K, θ and
    n, so a run starts in balance wherever the present surface is one, and
    only what departs from it moves the divide. Open edges are held at their present
    elevations, closed edges stay closed. The divide is measured from the
    model's own routing at eleven times, as the net area side a takes from
    side b divided by the length of the present divide that still separates
    the two sides (:func:`divides.model.tracking.exchange_displacement`):
    cells that open edges or other basins take from either side are not
    read as motion of this divide.

    Examples
    --------
    Two planes meeting at a crest, the western one twice as steep: it is
    lowered faster, so the crest moves east, into side b.

    >>> import numpy as np
    >>> c = np.arange(41.0)
    >>> z = np.minimum(20.0 * c, 10.0 * (40.0 - c))
    >>> dem = Dem.from_array(np.repeat(z[None], 6, axis=0), cell_size=100.0)
    >>> fc = forecast(dem, "west", "east", years=1e6, erodibility=1e-3, theta=0.1, channel_area_m2=3e4,
    ...               closed_edges=("north", "south"), n_runs=3, robustness=False)
    >>> fc.moves_toward, fc.bands_agree
    ('b', True)
    """
    years_f = _check_options(years, n_runs, seed, uplift, diffusivity, max_steps)
    lowering = _check_lowering(edge_lowering, assess_options.get("closed_edges"), assessment)
    _uplift_grid(uplift, dem, 1)  # a bad raster is refused before the long work
    if assessment is None:
        if not any(assess_options.get(k) is not None for k in _CALIBRATION_OPTIONS):
            raise ParameterError(NEEDS_CALIBRATION)
        from divides.assess.assessment import assess

        options = {"robustness": False, "seed": int(seed), **assess_options}
        assessment = assess(dem, side_a, side_b, lonlat=lonlat, **options)
    else:
        if assess_options:
            raise ParameterError(f"options {', '.join(sorted(assess_options))} belong to the assessment; "
                                 "give them to divides.assess, or leave out `assessment`")
        if assessment.dem.shape != dem.shape:
            raise ParameterError(f"the assessment was made on a {assessment.dem.shape} grid but the DEM is "
                                 f"{dem.shape}; assess this DEM first")
        if not (_same_side(side_a, assessment.sides.a.spec) and _same_side(side_b, assessment.sides.b.spec)):
            raise ParameterError(f"the assessment's sides are {assessment.sides.a.spec.text!r} and "
                                 f"{assessment.sides.b.spec.text!r}, not {side_a!r} and {side_b!r}")
    if not assessment.calibration.available:
        raise ParameterError(NEEDS_CALIBRATION)
    dem, voids = fill_voids(dem, assessment.config.voids)  # the model runs on the surface the assessment read
    theta_lo, theta_hi, theta_basis = _theta_interval(assessment)
    grid, factor = coarsen(dem, max_cells=max_cells)
    setup = prepare(grid, assessment.sides, factor=factor, closed_edges=tuple(assessment.config.closed_edges),
                    channel_area_m2=float(assessment.channels.threshold.value_m2))
    if lowering:
        setup = dataclasses.replace(setup, edges={**setup.edges, **{e: open_edge(lowering_rate=r)
                                                                   for e, r in lowering.items()}})
    calibrated = _calibrated(assessment, setup)

    common = dict(years=years_f, uplift_mode=_uplift_grid(uplift, dem, factor), max_steps=int(max_steps),
                  balance="steady")
    d0 = None if diffusivity is None else float(diffusivity)
    d_factor = FIT_D_FACTOR if d0 is None else D_FACTOR
    central = run_model(setup, label="central", theta=calibrated.theta0, n=calibrated.n,
                        k=calibrated.erodibility(calibrated.theta0, 0.5), diffusivity=d0, **common)
    members = []
    for i, (q_k, q_theta, q_n, q_d) in enumerate(_design(int(n_runs), int(seed))):
        theta = theta_lo + (theta_hi - theta_lo) * q_theta
        n_i = _spread(calibrated.n, N_FACTOR, q_n)
        members.append(run_model(setup, label=f"member {i + 1}", theta=theta, n=n_i,
                                 k=calibrated.erodibility(theta, q_k, n_i), **_member_d(d0, d_factor, q_d),
                                 **common))

    notes = _notes(dem, grid, factor, central, members, calibrated, theta_basis, uplift, setup, d0 is None)
    notes += [f"The base level of the {e} edge keeps falling at {_sig(1e3 * r)} mm/yr." for e, r in lowering.items()]
    notes += [note for note in (interior_nodata_note(voids, dem.n_valid),) if note]
    if assessment.config.sea_level_m is not None:
        notes.append("The model drains only off the DEM's open edges and nodata: cells at or below the sea level "
                     "given to the assessment are not held as outlets.")
    parameters = {
        "theta": calibrated.theta0,
        "theta_interval": [theta_lo, theta_hi],
        "theta_interval_basis": theta_basis,
        "n": calibrated.n,
        "m": calibrated.theta0 * calibrated.n,
        "calibration": calibrated.source,
        "erodibility": {"a": central.erodibility[0], "b": central.erodibility[1],
                        "unit": "m^(1-2m)/yr, E = K A^m S^n"},
        "uplift_mode": "raster" if isinstance(uplift, np.ndarray) else uplift,
        "uplift_m_per_yr": {"a": central.uplift[0], "b": central.uplift[1]},
        "diffusivity_m2_per_yr": central.diffusivity,
        "diffusivity_source": "given" if d0 is not None else "fitted: steady balance of the present surface",
        "ensemble_intervals": {"n": [calibrated.n / N_FACTOR, calibrated.n * N_FACTOR],
                               "diffusivity_m2_per_yr": [central.diffusivity / d_factor, central.diffusivity * d_factor],
                               "theta": [theta_lo, theta_hi]},
        "edges": {e: ("closed" if e in setup.closed else
                      f"open, lowered at {lowering[e]:g} m/yr" if e in lowering else "open, held at present elevations")
                  for e in ("north", "south", "west", "east")},
        "n_runs": int(n_runs),
        "seed": int(seed),
        "dt_yr": central.dt,
        "n_steps": central.n_steps,
        "courant": central.courant,
        "channel_area_m2": setup.channel_area_m2,
        "measure": MEASURE,
    }
    verdict = assessment.verdict
    summary = {"moves_toward": verdict.moves_toward, "confidence": verdict.confidence,
               "rate_mm_per_yr": None if assessment.rate is None else
               {k: assessment.rate[k] for k in ("low", "best", "high")}}
    return Forecast(
        years=years_f, side_a=assessment.sides.a.spec.text, side_b=assessment.sides.b.spec.text, dem=grid,
        factor=factor, source_shape=tuple(dem.shape), present=setup.present, present_length_m=setup.length_m,
        central=central, members=tuple(members), parameters=parameters, notes=notes, assessment=summary,
    )


def _notes(dem: Dem, grid: Dem, factor: int, central: ForecastRun, members: list, calibrated: _Calibrated,
           theta_basis: str, uplift: str | np.ndarray, setup: RunSetup, d_fitted: bool) -> list[str]:
    notes = []
    d_factor = FIT_D_FACTOR if d_fitted else D_FACTOR
    if factor > 1:
        notes.append(f"For speed the DEM ({dem.shape[0]} x {dem.shape[1]} cells) was block-averaged by {factor} x "
                     f"{factor} to {grid.shape[0]} x {grid.shape[1]} cells of about {grid.cell_size_m[0]:,.0f} m; "
                     "displacements below half a cell are not resolved.")
    runs = [central, *members]
    if any(r.courant > 1.5 for r in runs):
        notes.append("The step cap was reached: knickpoints cross more than one cell per step, which smooths "
                     "transients and can slow the modelled divide; raise max_steps for a finer run.")
    if calibrated.spread is None:
        notes.append(f"Erodibility from {calibrated.source} is taken as exact: the bands reflect θ "
                     f"({theta_basis}), n (within a factor {N_FACTOR:g}) and D (within a factor {d_factor:g}).")
    else:
        notes.append(f"Bands span K from {calibrated.source} (central 95 % of its samples), θ ({theta_basis}), "
                     f"n (within a factor {N_FACTOR:g}) and D (within a factor {d_factor:g}).")
    if isinstance(uplift, np.ndarray):
        notes.append("Uplift: the raster given" + (" (block-averaged with the DEM)." if factor > 1 else "."))
    else:
        notes.append("Uplift: " + ("one rate everywhere" if uplift == "uniform" else
                                   "one rate per side (fields split by side)")
                     + ", set so that the present surface is the model's steady state, K A^m S^n − D ∇²z = U "
                     "(least squares over both sides' cells).")
    if d_fitted:
        notes.append(f"Hillslope diffusivity D = {_sig(central.diffusivity)} m²/yr (central run), fitted with the "
                     "uplift from the same steady balance (hilltop curvature against channel erosion); give "
                     "`diffusivity` (--diffusivity) if it is known.")
    if any(r.captured for r in runs):
        notes.append("In at least one run a side's outlet came to drain through the other side (a capture): "
                     "displacements after that are those of the remaining cells.")
    if not setup.closed:
        notes.append("Open DEM edges hold their present elevations; cells near them are fixed at base level.")
    return notes

