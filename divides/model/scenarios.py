"""Small synthetic starting surfaces and the divide scenarios used to validate the assessment.

Every scenario is a ridge between the west and east edges (north and south
closed), so the divide between the two sides runs north-south and its
position is tracked per row. Each one states which way theory says the
divide should move: into the side whose channels have the lower erosion
potential at the divide (Willett et al. 2014; Whipple et al. 2017).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from divides.errors import ParameterError
from divides.io.dem import Dem
from divides.model.forcing import check_positive, open_edge
from divides.model.simulate import SimulationResult, simulate

__all__ = [
    "Scenario",
    "ridge_surface",
    "symmetric_divide",
    "off_centre_divide",
    "base_level_fall",
    "uplift_contrast",
    "erodibility_contrast",
    "runoff_contrast",
]

_SIDES = ("west", "east")


def _check_side(value: str, name: str) -> str:
    if value not in _SIDES:
        raise ParameterError(f"`{name}` must be 'west' or 'east'; got {value!r}")
    return value


def ridge_surface(
    shape: tuple[int, int] = (32, 64),
    *,
    cell_size: float = 100.0,
    crest: float = 0.5,
    relief: float = 50.0,
    noise: float = 1.0,
    seed: int = 0,
) -> Dem:
    """A ridge running north-south between the west and east edges, with seeded noise.

    Parameters
    ----------
    shape : (rows, cols)
        Grid size (at least 3 x 5).
    cell_size : float
        Cell size (m).
    crest : float
        Position of the crest as a fraction of the distance from the west
        edge cells to the east edge cells (0 < crest < 1).
    relief : float
        Crest elevation above the edges (m); both flanks are planar.
    noise : float
        Amplitude (m) of uniform noise added to the interior cells, so
        drainage networks can form.
    seed : int
        Seed of the noise.

    Returns
    -------
    Dem
        West and east edge cells at 0 m.

    Examples
    --------
    >>> import numpy as np
    >>> dem = ridge_surface((8, 11), crest=0.5, relief=10.0, noise=0.0)
    >>> np.round(dem.elevation[3], 9).tolist()
    [0.0, 2.0, 4.0, 6.0, 8.0, 10.0, 8.0, 6.0, 4.0, 2.0, 0.0]
    """
    try:
        rows, cols = (int(v) for v in shape)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"`shape` must be (rows, cols); got {shape!r}") from exc
    if rows < 3 or cols < 5:
        raise ParameterError(f"`shape` must be at least (3, 5) cells; got {shape!r}")
    if not (0.0 < float(crest) < 1.0):
        raise ParameterError(f"`crest` must be a fraction strictly between 0 and 1; got {crest!r}")
    cell = check_positive(cell_size, "cell_size", "m")
    relief_f = check_positive(relief, "relief", "m")
    if not (math.isfinite(float(noise)) and float(noise) >= 0):
        raise ParameterError(f"`noise` must be a number of metres >= 0; got {noise!r}")
    # Fractions of each flank counted from its own edge, so a centred ridge is exactly mirror-symmetric.
    c = np.arange(cols, dtype=np.float64)
    west = c / (crest * (cols - 1))
    east = c[::-1] / ((1.0 - crest) * (cols - 1))
    profile = np.minimum(west, east) * relief_f
    z = np.repeat(profile[None, :], rows, axis=0)
    rng = np.random.default_rng(seed)
    z[:, 1:-1] += float(noise) * rng.random((rows, cols - 2))
    return Dem.from_array(z, cell_size=cell, valid_range=None)


@dataclass(frozen=True, eq=False)
class Scenario:
    """A starting surface with its forcing and the divide motion theory expects.

    Attributes
    ----------
    name : str
        Short identifier.
    surface : Dem
        The starting surface.
    options : dict
        Keyword arguments for :func:`~divides.model.simulate` (uplift,
        erodibility, m, n, diffusivity, runoff, edges, track).
    moves_toward : str
        ``"west"`` or ``"east"``: the side the divide should move into (the
        victim); ``"stable"`` when it should stay.
    description : str
        One sentence on the set-up and the expectation.
    """

    name: str
    surface: Dem
    options: dict = field(default_factory=dict)
    moves_toward: str = "stable"
    description: str = ""

    def run(self, *, duration: float, dt: float, **overrides: Any) -> SimulationResult:
        """Run the scenario with :func:`~divides.model.simulate`; ``overrides`` replace options."""
        return simulate(self.surface, duration=duration, dt=dt, **{**self.options, **overrides})


def _base_options(uplift: Any, erodibility: Any, diffusivity: float, m: float, n: float) -> dict:
    return {
        "uplift": uplift,
        "erodibility": erodibility,
        "diffusivity": diffusivity,
        "m": m,
        "n": n,
        "edges": {"north": "closed", "south": "closed", "west": 0.0, "east": 0.0},
        "track": ("west", "east"),
    }


def _scaled_side(surface: Dem, side: str, value: float, ratio: float) -> np.ndarray:
    """A raster of ``value``, times ``ratio`` on ``side`` of the centre line (the initial crest)."""
    rows, cols = surface.shape
    west = np.arange(cols) / (cols - 1) <= 0.5
    on_side = west if side == "west" else ~west
    return np.repeat(np.where(on_side, value * ratio, value)[None, :], rows, axis=0)


def _contrast(side: str, side_name: str, ratio: float, what: str, shape: tuple[int, int], noise: float, seed: int) -> tuple[str, float, Dem]:
    """Validate a contrast scenario's side and ratio; build its surface."""
    return _check_side(side, side_name), check_positive(ratio, "ratio", f"the {what} ratio"), ridge_surface(shape, noise=noise, seed=seed)


def _other(side: str) -> str:
    return "west" if side == "east" else "east"


# Defaults: 0.1 mm/yr uplift, K for m = 0.5 and n = 1 (1/yr), so that the
# steady steepness U/K is 5 m and a 3 km channel rises some tens of metres.
_U = 1e-4
_K = 2e-5
_D = 0.01


def symmetric_divide(
    shape: tuple[int, int] = (32, 64), *, uplift: float = _U, erodibility: float = _K,
    diffusivity: float = _D, m: float = 0.5, n: float = 1.0, noise: float = 1.0, seed: int = 0,
) -> Scenario:
    """Centred ridge, uniform forcing: the divide should stay where it is."""
    surface = ridge_surface(shape, crest=0.5, noise=noise, seed=seed)
    return Scenario(
        "symmetric", surface, _base_options(uplift, erodibility, diffusivity, m, n), "stable",
        "Centred ridge with uniform uplift, erodibility and base level on both sides.",
    )


def off_centre_divide(
    shape: tuple[int, int] = (32, 64), *, crest: float = 0.3, uplift: float = _U, erodibility: float = _K,
    diffusivity: float = _D, m: float = 0.5, n: float = 1.0, noise: float = 1.0, seed: int = 0,
) -> Scenario:
    """Ridge off centre under uniform forcing: the divide should move toward the centre.

    The shorter side is steeper and, at equal base level, has the lower χ at
    the divide, so it is the aggressor (Willett et al. 2014).
    """
    if not (0.0 < float(crest) < 1.0) or float(crest) == 0.5:
        raise ParameterError(f"`crest` must be a fraction in (0, 1) other than 0.5; got {crest!r}")
    surface = ridge_surface(shape, crest=crest, noise=noise, seed=seed)
    toward = "east" if crest < 0.5 else "west"
    return Scenario(
        "off-centre", surface, _base_options(uplift, erodibility, diffusivity, m, n), toward,
        f"Ridge crest at {crest:g} of the width under uniform forcing; the divide should move {toward}, to the centre.",
    )


def base_level_fall(
    shape: tuple[int, int] = (32, 64), *, side: str = "east", drop: float | None = 20.0,
    lowering_rate: float | None = None, uplift: float = _U, erodibility: float = _K,
    diffusivity: float = _D, m: float = 0.5, n: float = 1.0, noise: float = 1.0, seed: int = 0,
) -> Scenario:
    """Base level of one side falls (suddenly by ``drop``, or steadily at ``lowering_rate``).

    The lowered side steepens and becomes the aggressor, so the divide
    should move into the other side.
    """
    side = _check_side(side, "side")
    if (drop is None) == (lowering_rate is None):
        raise ParameterError("give exactly one of `drop` (m, sudden) or `lowering_rate` (m/yr, steady)")
    options = _base_options(uplift, erodibility, diffusivity, m, n)
    if drop is not None:
        options["edges"][side] = open_edge(elevation=-check_positive(drop, "drop", "m"))
        how = f"falls suddenly by {drop:g} m"
    else:
        options["edges"][side] = open_edge(lowering_rate=check_positive(lowering_rate, "lowering_rate", "m/yr"))
        how = f"falls at {lowering_rate:g} m/yr"
    other = _other(side)
    return Scenario(
        f"base-level fall ({side})", ridge_surface(shape, noise=noise, seed=seed), options, other,
        f"The {side} base level {how}; the divide should move {other}.",
    )


def uplift_contrast(
    shape: tuple[int, int] = (32, 64), *, high_side: str = "east", ratio: float = 2.0, uplift: float = _U,
    erodibility: float = _K, diffusivity: float = _D, m: float = 0.5, n: float = 1.0, noise: float = 1.0, seed: int = 0,
) -> Scenario:
    """Uplift ``ratio`` times faster on one side of the initial crest.

    At steady state z = (U/K)^(1/n) χ (Perron & Royden 2013), so channel
    heads meet at equal elevation only if the faster-uplifting side has the
    smaller χ: the divide should move into the high-uplift side.
    """
    high_side, r, surface = _contrast(high_side, "high_side", ratio, "uplift", shape, noise, seed)
    u = _scaled_side(surface, high_side, uplift, r)
    return Scenario(
        f"uplift contrast ({high_side} x{r:g})", surface, _base_options(u, erodibility, diffusivity, m, n), high_side,
        f"Uplift {r:g} times faster on the {high_side} side; the divide should move {high_side}.",
    )


def erodibility_contrast(
    shape: tuple[int, int] = (32, 64), *, weak_side: str = "east", ratio: float = 2.0, uplift: float = _U,
    erodibility: float = _K, diffusivity: float = _D, m: float = 0.5, n: float = 1.0, noise: float = 1.0, seed: int = 0,
) -> Scenario:
    """Rock ``ratio`` times more erodible on one side of the initial crest.

    The weak side needs less steepness to keep up with uplift, so its heads
    sit lower: it is the aggressor and the divide should move into the
    strong side.
    """
    weak_side, r, surface = _contrast(weak_side, "weak_side", ratio, "erodibility", shape, noise, seed)
    k = _scaled_side(surface, weak_side, erodibility, r)
    strong = _other(weak_side)
    return Scenario(
        f"erodibility contrast ({weak_side} x{r:g})", surface, _base_options(uplift, k, diffusivity, m, n), strong,
        f"Erodibility {r:g} times higher on the {weak_side} side; the divide should move {strong}.",
    )


def runoff_contrast(
    shape: tuple[int, int] = (32, 64), *, wet_side: str = "east", ratio: float = 2.0, uplift: float = _U,
    erodibility: float = _K, diffusivity: float = _D, m: float = 0.5, n: float = 1.0, noise: float = 1.0, seed: int = 0,
) -> Scenario:
    """Runoff ``ratio`` times higher on one side of the initial crest.

    With the runoff-weighted area as discharge proxy the wet side erodes as
    if its erodibility were ``ratio**m`` times higher, so the divide should
    move into the dry side.
    """
    wet_side, r, surface = _contrast(wet_side, "wet_side", ratio, "runoff", shape, noise, seed)
    options = _base_options(uplift, erodibility, diffusivity, m, n)
    options["runoff"] = _scaled_side(surface, wet_side, 1.0, r)
    dry = _other(wet_side)
    return Scenario(
        f"runoff contrast ({wet_side} x{r:g})", surface, options, dry,
        f"Runoff {r:g} times higher on the {wet_side} side; the divide should move {dry}.",
    )
