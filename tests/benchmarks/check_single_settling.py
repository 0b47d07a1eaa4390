"""Does the single-divide benchmark's truth of stable controls change once the spin-up is settled at the
truth run's time step? (run by hand, not a test; docs/validation.md, *Regional screening*, *Version 3*)

    python tests/benchmarks/check_single_settling.py INDEX [INDEX ...]

For each landscape of master seed 0 (grid 120-400): the cached truth, and the truth of the same landscape
rebuilt with 8 more response times of spin-up at the truth run's step (``STEPS_PER_TAU`` per τ of the grown
relief, the τ ``build`` measures the truth with). The regional benchmark settles so (version 3); the
single-divide benchmark does not (yet).
"""

from __future__ import annotations

import json
import sys
import time

import numpy as np

from divides.model import benchmark as B
from divides.model.simulate import simulate

SETTLE_TAU = 8.0


def _settled_spin_up(original):
    def spin_up(start, forcing, physics, tau, sides):
        surface, chunks = original(start, forcing, physics, tau, sides)
        z = surface.elevation
        tau_grown = float(np.nanmax(z) - np.nanmin(z)) / float(np.median(forcing["uplift"]))
        surface = simulate(surface, duration=SETTLE_TAU * tau_grown, dt=tau_grown / B.STEPS_PER_TAU,
                           **physics, **forcing).final
        return surface, chunks
    return spin_up


def main() -> None:
    original = B._spin_up
    for index in map(int, sys.argv[1:]):
        started = time.perf_counter()
        cached = B.load_or_build(0, index)
        B._spin_up = _settled_spin_up(original)
        try:
            rebuilt = B.build(0, index)
        finally:
            B._spin_up = original
        c, r = cached.truth, rebuilt.truth
        print(json.dumps({"index": index, "family": cached.family, "split": cached.split,
                          "cached": [c["moves_toward"], round(c["rate_m_per_yr"] / c["threshold_m_per_yr"], 2)],
                          "settled": [r["moves_toward"], round(r["rate_m_per_yr"] / r["threshold_m_per_yr"], 2)],
                          "seconds": round(time.perf_counter() - started)}), flush=True)


if __name__ == "__main__":
    main()
