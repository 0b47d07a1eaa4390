"""Wall time and peak memory of `assess` with default options (run by hand, not a test).

    python tests/benchmarks/bench_assess.py [--sizes 1000 2000]

The ridge DEM of bench_network.py, west against east, default options (θ 0.45,
channel threshold from the data, 400 bootstrap resamples, robustness re-runs:
3 × DEM noise, θ ± its interval, channel area × ½ and × 2), after a JIT
warm-up on a small grid; each size in a fresh subprocess. Output writing
(report, figures) is timed separately.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from _harness import peak_rss_mb, sweep  # noqa: E402
from bench_network import ridge_dem  # noqa: E402


def run_one(n: int) -> dict:
    import divides

    divides.assess(divides.Dem.from_array(ridge_dem(200), cell_size=30.0), "west", "east")  # warm-up
    dem = divides.Dem.from_array(ridge_dem(n), cell_size=30.0)
    t0 = time.perf_counter()
    result = divides.assess(dem, "west", "east")
    seconds = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        result.write(Path(tmp) / "out")
        write_s = time.perf_counter() - t0
    return {"n": n, "assess_s": round(seconds, 1), "write_s": round(write_s, 1),
            "verdict": result.verdict.moves_toward, "confidence": result.verdict.confidence,
            "peak_rss_mb": peak_rss_mb()}


def _row(r: dict) -> str:
    return (f"{r['n']:>5}²  assess {r['assess_s']:6.1f} s + outputs {r['write_s']:5.1f} s  "
            f"verdict {r['verdict']} ({r['confidence']:.2f}), peak RSS {r['peak_rss_mb']} MB")


if __name__ == "__main__":
    sweep(__file__, __doc__, run_one, _row, [1000, 2000])
