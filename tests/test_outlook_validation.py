"""The forecast against divide motion measured by continuing model runs (slow).

Each landscape is grown with the project's stream-power model to a snapshot;
the run then continues for WINDOW years and the divide's motion is measured
by the area the two sides exchange (the same measure as the forecast, on the
model's own routing). The forecast starts from the snapshot as if it were a
DEM, given the true θ, n and D and either the true K or the mean erosion rates
measured in the run over its first 20 kyr (as basin-averaged cosmogenic rates
would be). Targets of issue 13, item 5: the right direction in >= 90 % of the
moving cases and the motion within a factor 2 in >= 70 %; with one side's
measured rate instead of K, within a factor 3 in >= 70 %. The figures per
family are in docs/validation.md. Theory of each set-up: Willett et al. (2014)
(χ and base level), Whipple et al. (2017) (uplift and erodibility contrasts).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

import divides
from divides.errors import DividesError
from divides.model import scenarios as S
from divides.model.simulate import simulate
from divides.model.tracking import edge_catchments, exchange_displacement
from divides.outlook import forecast
from divides.terrain.divide_lines import divide_between

pytestmark = pytest.mark.slow

SHAPE = (32, 64)
WINDOW = 5e5
RATE_WINDOW = 2e4
WALLS = ("north", "south")


def _sides(surface: divides.Dem) -> tuple[np.ndarray, np.ndarray]:
    labels = edge_catchments(divides.route(surface, closed_edges=WALLS), ["west", "east"])
    return labels == 1, labels == 2


def _case(scenario: S.Scenario, start: divides.Dem, snapshot_years: float) -> dict:
    options = {**scenario.options, "track": None}
    snap = simulate(start, duration=snapshot_years, dt=1e4, **options).final
    later = simulate(snap, duration=WINDOW, dt=1e4, snapshot_times=[RATE_WINDOW], **options)
    a0, b0 = _sides(snap)
    a1, b1 = _sides(later.final)
    lines = divide_between(snap, a0, b0).lines
    moved = exchange_displacement(snap.cell_area_grid(), (a0, b0), (a1, b1), lines)
    # mean erosion rate of each side over the first 20 kyr: uplift minus the change of height
    uplift = np.broadcast_to(np.asarray(options["uplift"], dtype=np.float64), snap.shape)
    erosion = uplift - (later.snapshots[0].elevation - snap.elevation) / RATE_WINDOW
    rates = tuple(1e3 * float(np.mean(erosion[mask])) for mask in (a0, b0))
    return {"snap": snap, "moved": moved, "rates_mm_yr": rates, "options": options}


def _forecast(case: dict, **calibration) -> float:
    o = case["options"]
    # an uplift that differs across the landscape is given as a raster (issue 13, item 1)
    uplift = "uniform" if np.ndim(o["uplift"]) == 0 else np.asarray(o["uplift"], dtype=np.float64)
    # so is a base level that keeps falling (a sudden fall has happened before the snapshot)
    lowering = {e: c.history(1e4) / 1e4 for e, c in o["edges"].items() if getattr(c, "mode", None) == "lowering"}
    fc = forecast(case["snap"], "west", "east", years=WINDOW, theta=o["m"] / o["n"], n=o["n"],
                  diffusivity=o["diffusivity"], closed_edges=WALLS, n_runs=1, robustness=False, uplift=uplift,
                  edge_lowering=lowering or None, **calibration)
    return float(fc.central.displacement_m[-1])


@pytest.fixture(scope="module")
def cases():
    steady = S.symmetric_divide(SHAPE, seed=1).run(duration=3e6, dt=2e4).final
    steep = S.symmetric_divide(SHAPE, n=1.5, erodibility=2e-5 * 5.0**0.5, seed=2)
    steady_n = steep.run(duration=3e6, dt=2e4).final
    fall_n = S.base_level_fall(SHAPE, side="west", drop=20.0, n=1.5, seed=12)
    fall_n = dataclasses.replace(fall_n, options={**fall_n.options, "erodibility": 2e-5 * 5.0**0.5})
    return {
        "off-centre crest 0.3": _case(S.off_centre_divide(SHAPE, crest=0.3, seed=10),
                                      S.off_centre_divide(SHAPE, crest=0.3, seed=10).surface, 1e6),
        "off-centre crest 0.7": _case(S.off_centre_divide(SHAPE, crest=0.7, seed=11),
                                      S.off_centre_divide(SHAPE, crest=0.7, seed=11).surface, 1e6),
        "base-level fall east (sudden)": _case(S.base_level_fall(SHAPE, side="east", drop=20.0, seed=4), steady, 2e5),
        "base-level fall west (sudden)": _case(S.base_level_fall(SHAPE, side="west", drop=20.0, seed=5), steady, 2e5),
        "base-level fall east (steady)": _case(S.base_level_fall(SHAPE, side="east", drop=None, lowering_rate=1e-4,
                                                                 seed=6), steady, 3e5),
        "base-level fall west, n = 1.5": _case(fall_n, steady_n, 2e5),
        "uplift contrast (east x2)": _case(S.uplift_contrast(SHAPE, high_side="east", seed=7), steady, 5e5),
        "erodibility contrast (east weak)": _case(S.erodibility_contrast(SHAPE, weak_side="east", seed=8), steady,
                                                  5e5),
    }


def _calibrations(case: dict) -> dict:
    k = case["options"]["erodibility"]
    ea, eb = case["rates_mm_yr"]
    given = {"K": {"erodibility": float(k)}} if np.ndim(k) == 0 else \
        {"both rates": {"erosion_rate_a_mm_yr": ea, "erosion_rate_b_mm_yr": eb}}
    return {**given, "rate of a": {"erosion_rate_a_mm_yr": ea}, "rate of b": {"erosion_rate_b_mm_yr": eb}}


@pytest.fixture(scope="module")
def ratios(cases):
    """Forecast / measured motion per case and calibration; NaN where the forecast was refused (a miss)."""
    rows, best, one_side = [], [], []
    for name, case in cases.items():
        truth = case["moved"]
        assert abs(truth) > 50.0, name  # every case moves by more than half a cell
        for label, calibration in _calibrations(case).items():
            try:
                said = _forecast(case, **calibration)
                ratio = said / truth
                rows.append(f"{name:34s} {label:10s} measured {truth:7.0f} m  forecast {said:7.0f} m  ratio {ratio:5.2f}")
            except DividesError as exc:  # refused with a reason: no forecast, counted as a miss
                ratio = np.nan
                rows.append(f"{name:34s} {label:10s} measured {truth:7.0f} m  refused: {exc}")
            (one_side if label.startswith("rate of") else best).append(ratio)
    print("\n".join(rows))
    return np.array(best), np.array(one_side)


def test_forecast_matches_the_measured_motion(ratios):
    best, _ = ratios
    assert np.mean(best > 0) >= 0.9  # right direction
    assert np.mean((best >= 0.5) & (best <= 2.0)) >= 0.7  # within a factor 2


@pytest.mark.xfail(strict=True, reason="measured (docs/validation.md): 11 of 16 within a factor 3 (69 %); 3 refused "
                   "(calibrated on the side whose base level fell: no channel steepness above the common base "
                   "level), the erodibility contrast read backwards from either side's rate")
def test_forecast_from_one_sides_rate_matches_the_measured_motion(ratios):
    _, one_side = ratios
    assert np.mean((one_side >= 1 / 3) & (one_side <= 3.0)) >= 0.7  # one side's rate: within a factor 3
