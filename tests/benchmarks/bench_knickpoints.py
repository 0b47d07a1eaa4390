"""False knickpoints on steady profiles and detection power, under white and correlated DEM error.

Profiles are analytic steady channels z = ksn·χ (Perron & Royden 2013; χ in closed form for a
Hack-type area growth, Hack 1957) on 30 m nodes, with DEM error drawn from the project's error
model (AR(1) along the profile, φ = exp(−Δ/L)); segmentation and knickpoint tests are given that
same model. Prints, per error family, the share of steady profiles with any significant knickpoint
and, per knickpoint size, the share of profiles where a significant knickpoint is found within
10 (and 25) nodes of the true one.

    python tests/benchmarks/bench_knickpoints.py [--profiles 200] [--seed 0]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parents[1] / "profiles"))
from synthetic import MIN_REACH, detect_all, draw_error, profile_case  # noqa: E402

TOLERANCES = (10, 25)  # nodes between the planted and the found knickpoint


def run(n_profiles: int, seed: int, families=("white", "ar1")) -> dict:
    out: dict = {}
    for family in families:
        rng = np.random.default_rng(seed)
        false = 0
        for _ in range(n_profiles):
            err = draw_error(rng, family)
            case = profile_case(rng, n=int(rng.integers(150, 600)), error=err, ks=float(rng.uniform(30, 120)))
            false += detect_all(case, err, ())[0]
        out[(family, "steady")] = false / n_profiles
        for kind, sizes in (("step", (1.0, 2.0, 3.0, 4.0)), ("slope", (0.05, 0.10, 0.15, 0.20, 0.30))):
            for size in sizes:
                hits = np.zeros(2)
                for _ in range(n_profiles):
                    err = draw_error(rng, family)
                    n = int(rng.integers(150, 600))
                    at = int(rng.integers(MIN_REACH, n - MIN_REACH))
                    amount = size * err.sigma_m if kind == "step" else size * rng.choice([-1.0, 1.0])
                    case = profile_case(rng, n=n, error=err, kind=kind, size=amount, at=at,
                                        ks=float(rng.uniform(30, 120)))
                    hits += detect_all(case, err, TOLERANCES)[1:]
                for tol, h in zip(TOLERANCES, hits):
                    out[(family, kind, size, f"within {tol} nodes")] = h / n_profiles
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--profiles", type=int, default=200)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()
    t0 = time.perf_counter()
    res = run(args.profiles, args.seed)
    for key, share in res.items():
        if key[1] == "steady":
            label = f"{key[0]:5s} steady profiles with any significant knickpoint"
        else:
            size = f"step {key[2]:g} σ" if key[1] == "step" else f"ksn change {100 * key[2]:g} %"
            label = f"{key[0]:5s} {size} found {key[3]}"
        print(f"{label}: {100 * share:.1f} %")
    print(f"{time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
