"""Migration rates against the benchmark's measured divide motion (issue 13, item 3; run by hand).

    python tests/benchmarks/bench_rates.py --split training --out /tmp/rates_training.jsonl
    python tests/benchmarks/bench_rates.py --split held-out --out /tmp/rates_held_out.jsonl

Every moving landscape of the verdict benchmark (``divides.model.benchmark``, master seed 0,
grids 120-260; truth measured by continuing each run) is assessed twice, given its true n and
m/n and either

* the true erodibility K (``--erodibility-k``), or
* one side's basin-averaged erosion rate instead of K, as a cosmogenic rate would give it: the
  mean of K A^m S^n over that side's cells of the observed DEM (the erosion law the run obeys,
  at the moment observed), side a in even landscapes and side b in odd ones.

Printed per family and in total, for the reported rate (``rate_mm_per_yr``), the rate at the divide
(``rate_at_divide_mm_per_yr``: near-divide erosion and crest kinematics) and the forward run's rate
(``forward_run.rate_mm_per_yr``, corrected for its bias on the training part): the
share of best rates within a factor of 2 (K) or 3 (one rate) of the measured rate, the share of
95 % intervals covering it, and how often the rate's direction is right when the verdict is.
Results are cached as JSON lines in ``--out``.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from collections import defaultdict
from pathlib import Path

import numpy as np


def _side_rate(s, a, side: str) -> float:
    """Basin-averaged K A^m S^n (m/yr) over one side's cells of the observed DEM."""
    from divides.model.forward_run import slopes

    p = s.parameters
    flow = a.flow
    mask = (a.sides.a if side == "a" else a.sides.b).mask.ravel()
    area = np.asarray(flow.area, dtype=np.float64).ravel()
    e = p["K"] * area ** p["m"] * slopes(flow) ** p["n"]
    return float(np.mean(e[mask]))


def _one(s, mode: str, cache: dict) -> dict:
    """Assess landscape ``s`` given K (``mode`` "K") or one side's basin-averaged erosion rate."""
    import divides

    p = s.parameters
    common = dict(closed_edges=s.closed_edges, robustness=False, n_bootstrap=100, theta=float(p["theta"]),
                  n=float(p["n"]))
    t = time.perf_counter()
    if mode == "K":
        a = divides.assess(s.dem(), s.sides["a"], s.sides["b"], erodibility=float(p["K"]), **common)
        cache[s.index] = a
    else:
        first = cache.pop(s.index, None) or divides.assess(s.dem(), s.sides["a"], s.sides["b"], forward_run=False,
                                                           **common)
        side = "a" if s.index % 2 == 0 else "b"
        rate = _side_rate(s, first, side) * 1e3
        a = divides.assess(s.dem(), s.sides["a"], s.sides["b"], **{f"erosion_rate_{side}_mm_yr": rate}, **common)
    v = a.verdict
    r = a.summary["verdict"]["rate_mm_per_yr"]
    return {"index": s.index, "family": s.family, "mode": mode, "truth": s.truth["moves_toward"],
            "truth_mm_yr": abs(s.truth["rate_m_per_yr"]) * 1e3, "verdict": v.moves_toward,
            "rate": r, "withheld": a.rate_withheld, "forward_rate": a.forward_rate,
            "rate_at_divide": a.summary["verdict"]["rate_at_divide_mm_per_yr"],
            "forward_shift_cells": v.forward_shift_cells,
            "forward_run": None if a.forward_run is None else
            {"shift_cells": a.forward_run.shift_cells, "years_unit_k": a.forward_run.years_unit_k,
             "cell_m": a.forward_run.cell_m},
            "K": float(p["K"]), "seconds": time.perf_counter() - t}


def _bias(recs: list[dict]) -> None:
    """The forward run's bias (ln measured / unbiased run rate) and log-spread on these records, with the
    leave-one-out share within a factor of 2 and covered by the bias ± 1.96 spread.

    Cases: K given, the verdict right, and the run moving the divide at least 0.1 cell its way (exactly the
    cases that get a forward rate); the run's rate with the true K is K x shift x cell / years at K = 1.
    """
    logs = []
    for r in recs:
        run = r.get("forward_run")
        if r["mode"] != "K" or r["verdict"] != r["truth"] or run is None or not np.isfinite(run["years_unit_k"]):
            continue
        if abs(run["shift_cells"]) < 0.1 or ("b" if run["shift_cells"] > 0 else "a") != r["verdict"]:
            continue
        unbiased = r["K"] * abs(run["shift_cells"]) * run["cell_m"] / run["years_unit_k"] * 1e3
        logs.append(np.log(r["truth_mm_yr"] / unbiased))
    x = np.asarray(logs)
    if x.size < 3:
        print("\nforward run's bias: fewer than 3 cases")
        return
    within = covered = 0
    for i in range(x.size):
        rest = np.delete(x, i)
        within += abs(x[i] - rest.mean()) <= np.log(2.0)
        covered += abs(x[i] - rest.mean()) <= 1.96 * rest.std(ddof=1)
    print(f"\nforward run's bias on {x.size} cases (K given, verdict right, run >= 0.1 cell its way): "
          f"FORWARD_RATE_LOG_BIAS = {x.mean():.3f} (x{np.exp(x.mean()):.2g}), FORWARD_RATE_LOG_SPREAD = "
          f"{x.std(ddof=1):.3f}; leave-one-out within x2 {within} ({within / x.size:.0%}), covered {covered} "
          f"({covered / x.size:.0%})")


def _summary(recs: list[dict], key: str, title: str, factor: float) -> None:
    fam = defaultdict(lambda: [0, 0, 0, 0, 0])  # moving, with a rate, within the factor, covered, verdict right
    ratios = []
    for r in recs:
        f = fam[r["family"]]
        f[0] += 1
        f[4] += r["verdict"] == r["truth"]
        rate = r.get(key)
        if key == "forward_rate" and abs(r.get("forward_shift_cells") or 0.0) < 0.1:
            rate = None  # below the run's resolution: withheld (as assess does since the fix of 8026267)
        if rate and rate.get("best") is not None:
            # a rate is only ever given in the verdict's direction, so its direction is right exactly
            # when the verdict is
            ratio = rate["best"] / r["truth_mm_yr"] if r["verdict"] == r["truth"] else -1.0
            ratios.append(ratio)
            f[1] += 1
            f[2] += (1 / factor) <= ratio <= factor
            f[3] += r["verdict"] == r["truth"] and rate["low"] <= r["truth_mm_yr"] <= rate["high"]
    tot = np.sum(list(fam.values()), axis=0) if fam else np.zeros(5, int)
    print(f"\n{title}: {tot[0]} moving landscapes, {tot[4]} with the right verdict, {tot[1]} with a rate")
    print(f"  best within x{factor:g} of measured: {tot[2]} ({tot[2] / max(tot[1], 1):.0%} of those with a rate); "
          f"95 % interval covers: {tot[3]} ({tot[3] / max(tot[1], 1):.0%})")
    print("  | family | moving | right verdict | with a rate | within | covered |\n"
          "  | --- | --- | --- | --- | --- | --- |")
    for k in sorted(fam):
        v = fam[k]
        print(f"  | {k} | {v[0]} | {v[4]} | {v[1]} | {v[2]} | {v[3]} |")
    if ratios:
        print("  ratio best / measured, quantiles 10-25-50-75-90 %: "
              + " ".join(f"{q:.2g}" for q in np.quantile(ratios, [0.1, 0.25, 0.5, 0.75, 0.9])))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--split", choices=("training", "held-out"), default="training")
    parser.add_argument("--n", type=int, default=300)
    parser.add_argument("--grid", type=int, nargs=2, default=(120, 260))
    parser.add_argument("--out", type=Path, required=True)
    args = parser.parse_args(argv)

    from divides.errors import DividesError
    from divides.model.benchmark import load_or_build

    done = {}
    if args.out.exists():
        for line in args.out.read_text().splitlines():
            rec = json.loads(line)
            done[(rec["index"], rec["mode"])] = rec
    cache: dict = {}
    for i in range(args.n):
        s = load_or_build(0, i, grid=tuple(args.grid))
        if s.split != args.split or s.truth is None or s.truth["moves_toward"] not in ("a", "b"):
            continue
        for mode in ("K", "one rate"):
            if (i, mode) in done:
                continue
            try:
                rec = _one(s, mode, cache)
            except DividesError as exc:
                rec = {"index": i, "family": s.family, "mode": mode, "truth": s.truth["moves_toward"],
                       "truth_mm_yr": abs(s.truth["rate_m_per_yr"]) * 1e3, "verdict": "refused", "rate": None,
                       "withheld": str(exc), "seconds": 0.0}
            with open(args.out, "a") as fh:
                fh.write(json.dumps(rec) + "\n")
            done[(i, mode)] = rec
            print(f"#{i} {s.family} {mode}: verdict {rec['verdict']} rate {rec['rate']} truth "
                  f"{rec['truth_mm_yr']:.3g} ({rec['seconds']:.1f} s)", flush=True)

    for mode, factor in (("K", 2.0), ("one rate", 3.0)):
        for key, label in (("rate", "reported rate"), ("rate_at_divide", "rate at the divide"),
                           ("forward_rate", "forward run's rate")):
            _summary([r for r in done.values() if r["mode"] == mode], key, f"{args.split}, {mode} given, {label}",
                     factor)
    if args.split == "training":  # the bias is learnt on the training part only
        _bias(list(done.values()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
