"""Every tunable parameter of an assessment, with defaults, units and validation."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, fields

from divides.errors import ParameterError

__all__ = ["AssessConfig"]


def _positive(name: str, value: float | None, *, allow_none: bool = True, allow_zero: bool = False) -> None:
    if value is None:
        if allow_none:
            return
        raise ParameterError(f"{name} is required")
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value) or \
            value < 0 or (value == 0 and not allow_zero):
        raise ParameterError(f"{name} must be a {'non-negative' if allow_zero else 'positive'} number; got {value!r}")


@dataclass(frozen=True)
class AssessConfig:
    """Parameters of :func:`divides.assess`. SI units (m, m², years) unless the name says otherwise.

    Attributes
    ----------
    theta : float or "auto"
        Concavity m/n for χ and ksn; "auto" estimates it by collinearity; default 0.45 (common practice).
    n : float
        Slope exponent of the stream-power law (1 unless known otherwise).
    a0_m2 : float
        Reference drainage area of χ (1 m², so the χ–z slope is ksn).
    channel_area_m2 : float or None
        Channel threshold; None reads it from slope–area data.
    reference_area_m2 : float or None
        Drainage area at which near-divide metrics are read; None = the channel threshold.
    base_level_m : float or None
        Common base level of every χ; None = the highest outlet of the channel networks
        reaching the divide. Networks whose outlet stands above it are left out of χ.
    dem_error_m : float
        Vertical standard error of the DEM (m), used for robustness noise and as the
        least step height of a knickpoint.
    dem_error_length_m : float or None
        Correlation length (m) of the DEM error, exp(−distance / L)
        (:class:`divides.terrain.dem_error.DemError`); None = three cells, because
        matching windows, filters and resampling kernels spread each error over a few
        cells (Hugonnet et al. 2022). 0 means white error.
    relief_radius_m : float
        Half-width of the square window of local relief.
    divide_spacing_m : float or None
        Spacing of divide sample points; None = two cells.
    block_m : float or None
        Block length of the bootstrap along the divide; None = 10 sample spacings.
    n_bootstrap : int
        Bootstrap resamples of each contrast.
    robustness : bool
        Re-run on perturbed inputs (DEM noise, θ interval, threshold ×½ and ×2).
    n_noise_runs : int
        DEM-noise re-runs in the robustness check.
    forward_run : bool
        Run the forward model from the DEM for 0.3 response times (K unknown) and report the
        divide's shift as a line of evidence; a forward run pointing against a confident
        near-divide direction turns the verdict "undetermined" (a few seconds; docs/validation.md).
    forward_in_decision : bool
        Let the calibrated decision read the forward run (the model fitted with it; it may then
        give a direction where the near-divide samples are too few). Off by default: on the
        benchmark's training part it gave more right directions but also more wrong ones.
    erosion_rate_a_mm_yr, erosion_rate_b_mm_yr : float or None
        Measured erosion rates (mm/yr) calibrating K (one) or given directly (both).
    erodibility : float or None
        K of E = K ksn^n in SI units (m^(1-2m)/yr for n = 1), if known.
    knickpoint_age_years : float or None
        Age of the most significant knickpoint, to calibrate K from its travel in χ.
    erosion_rate_a_error_mm_yr, erosion_rate_b_error_mm_yr : float or None
        One standard deviation of the measured rates (mm/yr; finite, >= 0).
    erodibility_error, knickpoint_age_error_years : float or None
        One standard deviation of K and of the knickpoint age (same units; finite, >= 0). All
        four are carried into the rate's interval (:func:`divides.assess.rate.calibrate`);
        None or 0: taken as exact.
    sea_level_m : float or None
        Cells at or below it are outlets.
    conditioning : str
        "fill" or "breach".
    voids : str
        Holes of nodata inside the DEM's data: "fill" (harmonic interpolation from their rims,
        :func:`divides.terrain.voids.fill_voids`) or "outlets" (left as nodata: water, a base level).
    closed_edges : tuple of str
        DEM edges that are not outlets (e.g. a DEM cut along a known divide).
    snap_radius_m : float or None
        Snapping radius of side points; None = five cells.
    seed : int
        Random seed of every bootstrap and perturbation.
    name_a, name_b : str or None
        Names of the sides used in the verdict, figures, layers and JSON
        (e.g. the rivers' names); None = "side a" / "side b".
    min_confidence : float
        Calibrated probability a direction or "stable" needs before it is returned
        (otherwise "undetermined"); in (1/3, 1], default 0.8 (docs/validation.md).
    """

    theta: float | str = 0.45
    n: float = 1.0
    a0_m2: float = 1.0
    channel_area_m2: float | None = None
    reference_area_m2: float | None = None
    base_level_m: float | None = None
    dem_error_m: float = 1.0
    dem_error_length_m: float | None = None
    relief_radius_m: float = 500.0
    divide_spacing_m: float | None = None
    block_m: float | None = None
    n_bootstrap: int = 400
    robustness: bool = True
    n_noise_runs: int = 3
    forward_run: bool = True
    forward_in_decision: bool = False
    erosion_rate_a_mm_yr: float | None = None
    erosion_rate_b_mm_yr: float | None = None
    erodibility: float | None = None
    knickpoint_age_years: float | None = None
    erosion_rate_a_error_mm_yr: float | None = None
    erosion_rate_b_error_mm_yr: float | None = None
    erodibility_error: float | None = None
    knickpoint_age_error_years: float | None = None
    sea_level_m: float | None = None
    conditioning: str = "fill"
    voids: str = "fill"
    closed_edges: tuple = ()
    snap_radius_m: float | None = None
    seed: int = 0
    name_a: str | None = None
    name_b: str | None = None
    min_confidence: float = 0.8
    extra: dict = field(default_factory=dict)

    def __post_init__(self) -> None:
        if isinstance(self.theta, str):
            if self.theta != "auto":
                raise ParameterError(f"theta must be a number between 0 and 2 or 'auto'; got {self.theta!r}")
        elif not (isinstance(self.theta, (int, float)) and math.isfinite(self.theta) and 0 < self.theta <= 2):
            raise ParameterError(f"theta must be a number between 0 and 2 or 'auto'; got {self.theta!r}")
        _positive("n (slope exponent)", self.n, allow_none=False)
        if not 0.5 <= self.n <= 4:
            raise ParameterError(f"n (slope exponent) must be between 0.5 and 4; got {self.n!r}")
        _positive("a0 (reference area, m²)", self.a0_m2, allow_none=False)
        for name in ("channel_area_m2", "reference_area_m2", "divide_spacing_m", "block_m", "erodibility",
                     "knickpoint_age_years", "snap_radius_m"):
            _positive(name, getattr(self, name))
        _positive("dem_error_m", self.dem_error_m, allow_none=False, allow_zero=True)
        _positive("dem_error_length_m", self.dem_error_length_m, allow_zero=True)
        _positive("relief_radius_m", self.relief_radius_m, allow_none=False)
        for name in ("erosion_rate_a_mm_yr", "erosion_rate_b_mm_yr"):
            value = getattr(self, name)
            _positive(name, value)
            if value is not None and value > 1000:
                raise ParameterError(f"{name} = {value} mm/yr is not an erosion rate (accepted: 0 < rate <= 1000 mm/yr)")
        for name in ("erosion_rate_a_error_mm_yr", "erosion_rate_b_error_mm_yr", "erodibility_error",
                     "knickpoint_age_error_years"):
            _positive(name, getattr(self, name), allow_zero=True)
        for name in ("base_level_m", "sea_level_m"):
            value = getattr(self, name)
            if value is not None and not (isinstance(value, (int, float)) and math.isfinite(value)):
                raise ParameterError(f"{name} must be a finite elevation in metres; got {value!r}")
        if not isinstance(self.n_bootstrap, int) or self.n_bootstrap < 50:
            raise ParameterError(f"n_bootstrap must be a whole number >= 50; got {self.n_bootstrap!r}")
        if not isinstance(self.n_noise_runs, int) or self.n_noise_runs < 0:
            raise ParameterError(f"n_noise_runs must be a whole number >= 0; got {self.n_noise_runs!r}")
        if self.conditioning not in ("fill", "breach"):
            raise ParameterError(f"conditioning must be 'fill' or 'breach'; got {self.conditioning!r}")
        if self.voids not in ("fill", "outlets"):  # divides.terrain.voids.VOID_HANDLING
            raise ParameterError(f"voids must be 'fill' or 'outlets'; got {self.voids!r}")
        bad_edges = set(self.closed_edges) - {"north", "south", "east", "west"}
        if isinstance(self.closed_edges, str) or bad_edges:
            raise ParameterError(f"closed_edges must be a list of north, south, east, west; got {self.closed_edges!r}")
        if not isinstance(self.seed, int) or isinstance(self.seed, bool) or self.seed < 0:
            raise ParameterError(f"seed must be a whole number >= 0; got {self.seed!r}")
        for key in ("name_a", "name_b"):
            value = getattr(self, key)
            if value is not None and not (isinstance(value, str) and value.strip() and len(value) <= 60
                                          and value.isprintable()):
                raise ParameterError(f"{key} must be a short name on one line (1 to 60 characters); got {value!r}")
        if self.name_a is not None and self.name_a.strip().lower() == (self.name_b or "").strip().lower():
            raise ParameterError(f"name_a and name_b are the same ({self.name_a!r}); give the sides different names")
        if not (isinstance(self.min_confidence, (int, float)) and not isinstance(self.min_confidence, bool)
                and 1.0 / 3.0 < self.min_confidence <= 1.0):
            raise ParameterError(f"min_confidence must be a probability above 1/3 and at most 1; got "
                                 f"{self.min_confidence!r}")
        calibrations = sum(x is not None for x in (self.erodibility, self.knickpoint_age_years)) + \
            (self.erosion_rate_a_mm_yr is not None or self.erosion_rate_b_mm_yr is not None)
        if calibrations > 1:
            raise ParameterError("give one calibration of erosion: erosion rate(s), erodibility K, "
                                 "or a knickpoint age — not several")

    @classmethod
    def from_options(cls, **options) -> AssessConfig:
        """Build from keyword options, refusing unknown names with the list of accepted ones."""
        names = {f.name for f in fields(cls)} - {"extra"}
        unknown = sorted(set(options) - names)
        if unknown:
            raise ParameterError(f"unknown option(s) {', '.join(unknown)}; accepted: {', '.join(sorted(names))}")
        return cls(**options)

    def dem_error(self, cell_size_m: float):
        """The DEM error model of this configuration on a grid of ``cell_size_m``."""
        from divides.terrain.dem_error import DemError  # numpy: not needed to validate options

        return DemError.for_cell_size(self.dem_error_m, cell_size_m, self.dem_error_length_m)

    def to_dict(self) -> dict:
        """JSON-ready parameters."""
        out = asdict(self)
        out.pop("extra")
        return out
