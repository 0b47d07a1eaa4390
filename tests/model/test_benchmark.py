"""The model-landscape benchmark: reproducible, mirror-true, and its truth agrees with crest kinematics.

References beside each check. The generator's own output is never the
expected value: directions come from the kinematics of two intersecting
planes (Gilbert 1877's principle; METHODS, crest kinematics), a base-level
fall on one side (Willett et al. 2014), mirror symmetry, and the AR(1)
autocorrelation function (Box & Jenkins).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

import divides
from divides.model import benchmark as B
from divides.model.benchmark_families import FAMILIES, STABLE_FAMILIES

SMALL = (40, 48)  # grid range for quick landscapes
DX = 100.0


def _planes(rows: int = 10, cols: int = 61, s_a: float = 0.2, s_b: float = 0.1) -> divides.Dem:
    """A plane of gradient s_a rising east from the west edge meeting one of gradient s_b rising west."""
    c = np.arange(cols, dtype=np.float64)
    z = np.minimum(s_a * DX * c, s_b * DX * (cols - 1 - c))
    return divides.Dem.from_array(np.repeat(z[None], rows, axis=0), cell_size=DX, valid_range=None)


# θ = 0.01 makes E = K A^m S^n nearly E = K S^n, so each plane is lowered uniformly (within A^0.01).
_PLANE_FORCING = {"uplift": 0.0, "erodibility": 1e-3, "m": 0.01, "n": 1.0, "diffusivity": 0.0,
                  "edges": {"north": "closed", "south": "closed"}}


def test_truth_follows_the_kinematics_of_two_lowering_planes():
    # Crest between planes lowered at E_a = K S_a and E_b = K S_b moves into b at
    # V = (E_a - E_b) / (S_a + S_b) (Gilbert 1877 principle; METHODS crest kinematics, derived),
    # until the fixed base level's signal reaches the crest (~1.8 Myr on side a, Royden & Perron 2013).
    window = 1.0e6
    truth = B.measure_motion(_planes(), _PLANE_FORCING, sides=("west", "east"), window_yr=window, steps=40,
                             tau_yr=1e6)
    v = 1e-3 * (0.2 - 0.1) / (0.2 + 0.1)
    lo, hi = v * DX**0.02, v * (60 * DX * DX) ** 0.01  # the A^0.01 factor between one cell and a row
    assert lo * window - DX <= truth.shift_m <= hi * window + DX  # one cell of slack for the grid
    assert lo - DX / window <= truth.rate_m_per_yr <= hi + DX / window
    assert truth.moves_toward == "b"


def test_truth_of_equal_planes_is_stable():
    # Equal gradients: E_a = E_b, so V = 0 (same kinematics); the divide must be measured as still.
    truth = B.measure_motion(_planes(s_a=0.1), _PLANE_FORCING, sides=("west", "east"), window_yr=1e6, steps=40,
                             tau_yr=1e6)
    assert truth.moves_toward == "stable"
    assert abs(truth.shift_m) < DX


def test_truth_on_north_south_sides_uses_columns():
    # The same planes turned a quarter: sides north (a) and south (b); same kinematics, same direction.
    dem = _planes()
    turned = divides.Dem.from_array(np.ascontiguousarray(dem.elevation.T), cell_size=DX, valid_range=None)
    forcing = {**_PLANE_FORCING, "edges": {"west": "closed", "east": "closed"}}
    truth = B.measure_motion(turned, forcing, sides=("north", "south"), window_yr=1e6, steps=40, tau_yr=1e6)
    assert truth.moves_toward == "b" and truth.n_lines >= 8


MEDIUM = (64, 80)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_base_level_fall_moves_the_divide_away_from_the_lowered_side(seed):
    # After a base-level fall the lowered side erodes faster than its uplift at the crest while the
    # other side balances it, so the crest moves into the other side (Willett et al. 2014; crest
    # kinematics V = [(U_b - E_b) - (U_a - E_a)] / (S_a + S_b)). The sign must be right; whether it is
    # fast enough to count as moving depends on when the signal reaches the crest.
    index = FAMILIES.index("base_level_fall_sudden")
    on_b = B.build(seed, index, grid=MEDIUM, mirror=False)
    on_a = B.build(seed, index, grid=MEDIUM, mirror=True)
    assert on_b.forced_side == "b" and on_b.truth["rate_m_per_yr"] < 0 and on_b.truth["moves_toward"] != "b"
    assert on_a.forced_side == "a" and on_a.truth["rate_m_per_yr"] > 0 and on_a.truth["moves_toward"] != "a"


def test_mirror_swaps_the_sides():
    # Mirror symmetry of the model: the mirrored set-up is the mirror image of the landscape, and its
    # divide moves the other way at the same rate (within a tenth: D8 may break exact ties one way).
    index = FAMILIES.index("weak_rock_exposed")
    on_b = B.build(4, index, grid=MEDIUM, mirror=False, rotate=False)
    on_a = B.build(4, index, grid=MEDIUM, mirror=True, rotate=False)
    relief = float(on_b.elevation.max() - on_b.elevation.min())
    assert np.median(np.abs(on_a.elevation[:, ::-1] - on_b.elevation)) < 0.01 * relief
    assert on_a.truth["rate_m_per_yr"] == pytest.approx(-on_b.truth["rate_m_per_yr"], rel=0.1)
    assert {on_a.truth["moves_toward"], on_b.truth["moves_toward"]} in ({"a", "b"}, {"stable"})
    assert on_a.parameters["K"] == on_b.parameters["K"] and on_a.seed == on_b.seed
    # Rotated a quarter, the same set-up has sides north and south and the same truth.
    turned = B.build(4, index, grid=MEDIUM, mirror=False, rotate=True)
    assert turned.sides["kind"] == "points" or (turned.sides["a"], turned.sides["b"]) == ("north", "south")
    assert turned.truth["rate_m_per_yr"] == pytest.approx(on_b.truth["rate_m_per_yr"], rel=0.1)


def test_symmetric_stable_control_is_measured_as_not_moving():
    # Uniform forcing, centred crest, steady state: by symmetry nothing favours either side.
    index = FAMILIES.index("steady_symmetric")
    landscape = B.build(5, index, grid=SMALL)
    assert landscape.truth["moves_toward"] == "stable"
    assert abs(landscape.truth["rate_m_per_yr"]) < landscape.truth["threshold_m_per_yr"]


def test_a_landscape_is_reproducible_from_its_seed(tmp_path: Path):
    index = FAMILIES.index("off_centre_relaxing")
    first = B.build(7, index, grid=SMALL)
    again = B.build(7, index, grid=SMALL)
    np.testing.assert_array_equal(first.elevation, again.elevation)
    assert {**first.to_meta(), "seconds": 0} == {**again.to_meta(), "seconds": 0}
    # The cache returns the same record, and a saved record reads back exactly.
    cached = B.load_or_build(7, index, grid=SMALL, cache_dir=tmp_path)
    path = next(tmp_path.rglob("*.npz"))
    assert f"v{B.GENERATOR_VERSION}" in str(path) and "seed7" in str(path)
    loaded = B.load_or_build(7, index, grid=SMALL, cache_dir=tmp_path)
    np.testing.assert_array_equal(loaded.elevation, first.elevation)
    assert loaded.to_meta() == cached.to_meta()
    assert loaded.dem().shape == first.elevation.shape


def test_draws_cover_every_family_on_either_side_within_the_ranges():
    draws = [B.draw(0, i) for i in range(280)]
    pairs = {(d["family"], d["mirror"]) for d in draws[:28]}
    assert pairs == {(f, m) for f in FAMILIES for m in (False, True)}  # any 28 consecutive cover all
    assert len(FAMILIES) >= 14 and set(STABLE_FAMILIES) <= set(FAMILIES)
    for d in draws:
        assert 10.0 <= d["cell"] <= 90.0
        assert all(120 <= s <= 400 for s in d["shape"])
        assert 0.7 <= d["n"] <= 2.0 and 0.3 <= d["theta"] <= 0.7
        assert d["m"] == pytest.approx(d["theta"] * d["n"])
        assert 5e-5 <= d["u0"] <= 3e-3
        assert d["diffusivity"] >= 0.0
        if d["family"] == "tilt_uplift_n1":
            assert d["n"] == 1.0
        if d["family"] == "tilt_uplift_n_other":
            assert abs(d["n"] - 1.0) >= 0.2
    # Broad draws: both edge conditions, both side kinds, both orientations, with and without DEM error,
    # D = 0 and D > 0.
    assert {d["lateral"]["north"] for d in draws} == {"open", "closed"}
    assert {d["points"] for d in draws} == {True, False}
    assert {d["rotate"] for d in draws} == {True, False}
    assert any(d["noise"] is None for d in draws) and any(d["noise"] is not None for d in draws)
    assert any(d["diffusivity"] == 0 for d in draws) and any(d["diffusivity"] > 0 for d in draws)


def test_split_is_a_fixed_function_of_the_seed():
    seeds = [B.landscape_seed(0, i) for i in range(300)]
    splits = [B.split_of(s) for s in seeds]
    assert splits == [B.split_of(s) for s in seeds]
    share = splits.count("training") / len(splits)
    assert share <= 0.6  # the rule: training at most 60 %
    # SHA-256 output is uniform, so the training share of many seeds is Bernoulli(TRAINING_SHARE):
    # 4 binomial standard deviations over 5000 seeds (common practice).
    many = [B.split_of(s) for s in range(5000)]
    assert abs(many.count("training") / 5000 - B.TRAINING_SHARE) < 4 * math.sqrt(0.25 / 5000)


def test_correlated_error_has_the_exponential_covariance():
    # AR(1) with φ along rows and columns: standard deviation σ, lag-k autocorrelation φ^k (Box & Jenkins).
    sigma, ell = 1.5, 3.0
    phi = math.exp(-1.0 / ell)
    e = B.correlated_error((400, 400), sigma, ell, np.random.default_rng(1))
    assert e.std() == pytest.approx(sigma, rel=0.05)
    def corr(a, b):
        return float(np.corrcoef(a.ravel(), b.ravel())[0, 1])
    assert corr(e[:, 1:], e[:, :-1]) == pytest.approx(phi, abs=0.03)
    assert corr(e[1:], e[:-1]) == pytest.approx(phi, abs=0.03)
    assert corr(e[:, 2:], e[:, :-2]) == pytest.approx(phi**2, abs=0.03)
    assert corr(e[1:, 1:], e[:-1, :-1]) == pytest.approx(phi**2, abs=0.03)  # separable: φ^(|Δr| + |Δc|)
    # Stationary to the edges: the first row and column are as variable as the middle.
    assert e[0].std() == pytest.approx(sigma, rel=0.15) and e[:, 0].std() == pytest.approx(sigma, rel=0.15)


def test_bad_benchmark_requests_are_refused():
    with pytest.raises(divides.errors.ParameterError):
        B.generate(0)
    with pytest.raises(divides.errors.ParameterError):
        B.landscape_seed(-1, 0)
    with pytest.raises(divides.errors.ParameterError):
        B.generate(1, grid=(10, 8))


@pytest.mark.slow
def test_generation_over_two_dask_workers_matches_one_process(tmp_path: Path):
    one = B.generate(3, seed=11, workers=1, grid=SMALL, cache_dir="")
    two = B.generate(3, seed=11, workers=2, grid=SMALL, cache_dir=tmp_path)
    for x, y in zip(one, two):
        np.testing.assert_array_equal(x.elevation, y.elevation)
        assert x.truth == y.truth


FROZEN = Path(__file__).resolve().parents[1] / "data" / "benchmark_frozen"


@pytest.fixture(scope="module")
def frozen() -> list[B.Landscape]:
    return B.load_folder(FROZEN)


def test_frozen_subset_holds_every_family_on_either_side(frozen):
    # The frozen subset is landscapes 0-27 of master seed 0 on grids of 120-160 cells
    # (tests/benchmarks/bench_verdict.py --n 28 --seed 0 --grid 120 160 --export).
    assert 14 <= len(frozen) <= 40
    assert {(s.family, s.forced_side) for s in frozen} == {(f, side) for f in FAMILIES for side in "ab"}
    assert all(s.version == B.GENERATOR_VERSION for s in frozen)  # else regenerate it
    for s in frozen:
        assert s.split == B.split_of(s.seed) and s.seed == B.landscape_seed(s.master_seed, s.index)
        assert max(s.elevation.shape) <= 160 and np.all(np.isfinite(s.elevation))
        assert s.truth["moves_toward"] in ("a", "b", "stable")
        assert s.sides["kind"] in ("edges", "points")
    assert {s.sides["kind"] for s in frozen} == {"edges", "points"}
    assert any(s.dem_error is not None for s in frozen)
    assert 0 < sum(s.split == "training" for s in frozen) <= 0.6 * len(frozen)


def test_frozen_stable_controls_are_measured_stable(frozen):
    # Steady state under uniform forcing or a contrast: the divide no longer moves
    # (Whipple et al. 2017; Forte & Whipple 2018 on steady but lopsided divides).
    for s in frozen:
        if s.family in STABLE_FAMILIES:
            assert s.truth["moves_toward"] == "stable", (s.index, s.family)


def test_frozen_records_are_reproducible_from_their_seeds(frozen):
    # Rebuild the quickest record from its seed alone; the stored DEM and truth must come back
    # (DEM within a millimetre: float32 storage and floating-point order across machines).
    s = min(frozen, key=lambda r: r.seconds)
    again = B.build(s.master_seed, s.index, grid=(120, 160))
    np.testing.assert_allclose(again.elevation, s.elevation, atol=1e-3)
    assert again.truth["moves_toward"] == s.truth["moves_toward"]
