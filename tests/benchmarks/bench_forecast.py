"""`divides forecast` against the benchmark's measured divide motion (issue 13, item 5; run by hand).

    python tests/benchmarks/bench_forecast.py --split held-out --out /tmp/forecast_held_out.jsonl
    # on two cores: two shards, then the table of both
    python tests/benchmarks/bench_forecast.py --split training --shard 0/2 --out /tmp/f0.jsonl &
    python tests/benchmarks/bench_forecast.py --split training --shard 1/2 --out /tmp/f1.jsonl
    python tests/benchmarks/bench_forecast.py --split training --n 0 --out /tmp/f0.jsonl --also /tmp/f1.jsonl

Every moving landscape of the verdict benchmark (``divides.model.benchmark``, master seed 0, grids
120-260; truth measured by continuing each run) is forecast over its truth window with its true K, n
and m/n, the default diffusivity (D unknown to a user: fitted with the uplift from the DEM), uniform
uplift, 5 runs (the central one and an ensemble over K, θ, n and D). Printed per family: direction of the
central run right, its displacement within a factor of 2 of the measured shift, and the direction the
forecast's summary gives ("a"/"b" right, wrong, "stable", "undetermined"). Cached as JSON lines in ``--out``.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from collections import defaultdict
from pathlib import Path


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--split", choices=("training", "held-out"), default="held-out")
    parser.add_argument("--n", type=int, default=300)
    parser.add_argument("--grid", type=int, nargs=2, default=(120, 260))
    parser.add_argument("--out", type=Path, required=True)
    parser.add_argument("--shard", default="0/1", help="k/N: only landscapes whose index is k modulo N")
    parser.add_argument("--per-family", type=int, default=0,
                        help="only the first K moving landscapes of each family (index order; 0: all)")
    parser.add_argument("--runs", type=int, default=5, help="model runs per forecast (1: the central run only)")
    parser.add_argument("--also", type=Path, nargs="*", default=[], help="other shards' files, for the table")
    args = parser.parse_args(argv)

    import divides
    from divides.errors import DividesError
    from divides.model.benchmark import load_or_build

    done = {}
    if args.out.exists():
        done = {json.loads(line)["index"]: json.loads(line) for line in args.out.read_text().splitlines()}
    k_shard, n_shard = (int(v) for v in args.shard.split("/"))
    taken: dict[str, int] = defaultdict(int)
    for i in range(args.n):
        s = load_or_build(0, i, grid=tuple(args.grid))
        if s.split != args.split or s.truth is None or s.truth["moves_toward"] not in ("a", "b"):
            continue
        taken[s.family] += 1
        if i in done or i % n_shard != k_shard or (args.per_family and taken[s.family] > args.per_family):
            continue
        p, t = s.parameters, time.perf_counter()
        rec = {"index": i, "family": s.family, "truth": s.truth["moves_toward"], "truth_shift_m": s.truth["shift_m"]}
        try:
            a = divides.assess(s.dem(), s.sides["a"], s.sides["b"], closed_edges=s.closed_edges, robustness=False,
                               n_bootstrap=50, theta=float(p["theta"]), n=float(p["n"]), erodibility=float(p["K"]),
                               forward_run=False)
            fc = divides.forecast(s.dem(), s.sides["a"], s.sides["b"], years=float(s.truth["window_yr"]),
                                  assessment=a, n_runs=args.runs)
            runs = [fc.central, *fc.members]
            rec.update(central_m=float(fc.central.displacement_m[-1]),
                       members_m=[float(r.displacement_m[-1]) for r in runs], says=fc.moves_toward, error=None,
                       diffusivity=fc.central.diffusivity, uplift=fc.central.uplift[0])
        except DividesError as exc:
            rec.update(central_m=None, members_m=[], says="refused", error=str(exc))
        rec["seconds"] = time.perf_counter() - t
        with open(args.out, "a") as fh:
            fh.write(json.dumps(rec) + "\n")
        done[i] = rec
        print(f"#{i} {s.family}: truth {rec['truth_shift_m']:.3g} m, forecast {rec['central_m']} ({rec['seconds']:.0f} s)",
              flush=True)

    for extra in args.also:
        for line in extra.read_text().splitlines():
            r = json.loads(line)
            done.setdefault(r["index"], r)
    fam = defaultdict(lambda: [0, 0, 0, 0, 0, 0])
    for r in done.values():
        f = fam[r["family"]]
        f[0] += 1
        c, truth = r["central_m"], r["truth_shift_m"]
        if c is not None and c * truth > 0:
            f[1] += 1
            f[2] += 0.5 <= c / truth <= 2.0
        says = r["says"]
        f[3] += says == r["truth"]
        f[4] += says in ("a", "b") and says != r["truth"]
        f[5] += says == "stable"
    tot = [sum(v[k] for v in fam.values()) for k in range(6)]
    print(f"\n{args.split}: {tot[0]} moving landscapes; central run's direction right {tot[1]} "
          f"({tot[1] / max(tot[0], 1):.0%}); within x2 of the measured shift {tot[2]} ({tot[2] / max(tot[0], 1):.0%})")
    print(f"summary gives the right direction {tot[3]} ({tot[3] / max(tot[0], 1):.0%}), the wrong one {tot[4]}, "
          f"'stable' {tot[5]}, 'undetermined' or refused {tot[0] - tot[3] - tot[4] - tot[5]}")
    print("| family | moving | central run's direction right | within x2 | summary right | summary wrong | "
          "summary stable |\n| --- | --- | --- | --- | --- | --- | --- |")
    for k in sorted(fam):
        print("| " + " | ".join([k] + [str(v) for v in fam[k][:6]]) + " |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
