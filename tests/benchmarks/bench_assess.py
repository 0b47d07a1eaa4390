"""Wall time and peak memory of `assess` with default options (run by hand, not a test).

    python tests/benchmarks/bench_assess.py [--sizes 1000 2000]

The ridge DEM of bench_network.py, west against east, default options (θ 0.45,
channel threshold from the data, 400 bootstrap resamples, robustness re-runs:
3 × DEM noise, θ ± its interval, channel area × ½ and × 2), after a JIT
warm-up on a small grid; each size in a fresh subprocess. Output writing
(report, figures) is timed separately.
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
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
            "peak_rss_mb": round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 2000])
    parser.add_argument("--one", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(run_one(args.one)))
        return
    for n in args.sizes:
        out = subprocess.run([sys.executable, __file__, "--one", str(n)], capture_output=True, text=True, check=True)
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(f"{r['n']:>5}²  assess {r['assess_s']:6.1f} s + outputs {r['write_s']:5.1f} s  "
              f"verdict {r['verdict']} ({r['confidence']:.2f}), peak RSS {r['peak_rss_mb']} MB")


if __name__ == "__main__":
    main()
