"""Generate the model-landscape benchmark and report what it holds and what it costs (run by hand).

    python tests/benchmarks/bench_verdict.py --n 28 --seed 0 --workers 2 [--grid 120 400] [--out DIR]

Landscapes come from :mod:`divides.model.benchmark` (cached under
``$XDG_CACHE_HOME/divides/benchmark``, so a second run only reads them).
Prints per family the count on each side, the measured truth (a / b /
stable / unmeasured) and how often it agrees with theory's expectation for
the set-up, the split (training / held-out), the time per landscape, and what
300 landscapes would cost. With ``--out`` writes ``landscapes.csv`` (one row
per landscape) and, with ``--export``, the records themselves (the frozen
subset under ``tests/data/benchmark_frozen`` is made this way). With
``--assess`` runs today's ``divides.assess`` (default options) on every
landscape and prints its verdicts against the measured truth per family and
the targets of the verdict issue, for the training and the held-out part
separately: a baseline, nothing is fitted.
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from collections import Counter, defaultdict
from pathlib import Path

COLUMNS = ("index", "seed", "split", "family", "forced_side", "expected", "truth", "rate_m_per_yr",
           "threshold_m_per_yr", "rows", "cols", "cell_m", "n", "theta", "U_m_per_yr", "D_m2_per_yr",
           "relief_m", "tau_yr", "sides", "closed_edges", "dem_error_sigma_m", "dem_error_corr_cells", "seconds")


def _row(s) -> dict:
    p, t = s.parameters, s.truth
    err = s.dem_error or {}
    return {
        "index": s.index, "seed": s.seed, "split": s.split, "family": s.family, "forced_side": s.forced_side,
        "expected": s.expected, "truth": t["moves_toward"], "rate_m_per_yr": f"{t['rate_m_per_yr']:.4g}",
        "threshold_m_per_yr": f"{t['threshold_m_per_yr']:.3g}", "rows": s.elevation.shape[0],
        "cols": s.elevation.shape[1], "cell_m": f"{s.cell_size:.1f}", "n": f"{p['n']:.3f}",
        "theta": f"{p['theta']:.3f}", "U_m_per_yr": f"{p['U_m_per_yr']:.3g}", "D_m2_per_yr": f"{p['D_m2_per_yr']:.3g}",
        "relief_m": f"{p['relief_m']:.0f}", "tau_yr": f"{p['tau_yr']:.3g}", "sides": s.sides["kind"],
        "closed_edges": " ".join(s.closed_edges), "dem_error_sigma_m": err.get("sigma_m", ""),
        "dem_error_corr_cells": err.get("corr_cells", ""), "seconds": f"{s.seconds:.2f}",
    }


def _assess_one(s) -> dict:
    """Today's verdict on one landscape; a refusal (bad sides, no channels) counts as undetermined."""
    import divides
    from divides.errors import DividesError

    try:
        v = divides.assess(s.dem(), s.sides["a"], s.sides["b"], closed_edges=s.closed_edges).verdict
        return {"index": s.index, "said": v.moves_toward, "confidence": float(v.confidence), "refused": None}
    except DividesError as exc:
        return {"index": s.index, "said": "undetermined", "confidence": 0.0, "refused": str(exc)}


def _baseline(landscapes, workers: int) -> None:
    from divides.assess.calibration import TARGETS, score

    started = time.perf_counter()
    if workers > 1:
        import logging

        from dask.distributed import Client, LocalCluster

        with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None,
                          silence_logs=logging.ERROR) as cluster, Client(cluster) as client:
            results = client.gather(client.map(_assess_one, landscapes, pure=False))
    else:
        results = [_assess_one(s) for s in landscapes]
    got = {r["index"]: r for r in results}
    print(f"\nbaseline: today's assess on {len(landscapes)} landscapes in {time.perf_counter() - started:.0f} s")
    rows = [(s, got[s.index]) for s in landscapes if s.truth["moves_toward"] is not None]
    print(f"{'family':28s} {'truth -> verdict (confidence)'}")
    for s, r in rows:
        note = f"  refused: {r['refused'][:70]}" if r["refused"] else ""
        print(f"{s.family:28s} {s.split:9s} {s.truth['moves_toward']:6s} -> {r['said']:12s} ({r['confidence']:.2f}){note}")
    for part in ("training", "held-out"):
        sel = [(s, r) for s, r in rows if s.split == part]
        if not sel:
            continue
        card = score([s.truth["moves_toward"] for s, _ in sel], [r["said"] for _, r in sel],
                     [r["confidence"] for _, r in sel])
        met = card.met()
        print(f"{part} ({card.n}): " + "; ".join(
            f"{k.replace('_', ' ')} {v:.2f} (target {'>=' if TARGETS[k][1] == 'min' else '<='} {TARGETS[k][0]:g}"
            f"{'' if met[k] is None else ', met' if met[k] else ', missed'})" for k, v in card.shares.items()))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--n", type=int, default=28, help="number of landscapes (28 = every family on either side)")
    parser.add_argument("--seed", type=int, default=0, help="master seed (>= 0)")
    parser.add_argument("--workers", type=int, default=1, help="Dask worker processes (this machine: at most 2)")
    parser.add_argument("--grid", type=int, nargs=2, default=(120, 400), metavar=("LO", "HI"),
                        help="range of rows and of columns (default 120 400)")
    parser.add_argument("--cache", default=None, help="cache folder (default $XDG_CACHE_HOME/divides/benchmark; '' for none)")
    parser.add_argument("--out", type=Path, default=None, help="folder for landscapes.csv (and records with --export)")
    parser.add_argument("--export", action="store_true", help="copy the records (.npz) into --out")
    parser.add_argument("--assess", action="store_true", help="run today's assess on every landscape (baseline)")
    args = parser.parse_args(argv)

    from divides.errors import DividesError
    from divides.model import benchmark as B
    from divides.model.benchmark_families import FAMILIES

    started = time.perf_counter()
    count = 0

    def progress(s) -> None:
        nonlocal count
        count += 1
        print(f"[{count:4d}/{args.n}] #{s.index:<4d} {s.family:28s} side {s.forced_side} "
              f"{s.elevation.shape[0]}x{s.elevation.shape[1]} truth {str(s.truth['moves_toward']):8s} "
              f"{s.seconds:6.1f} s", flush=True)

    try:
        landscapes = B.generate(args.n, seed=args.seed, workers=args.workers, grid=tuple(args.grid),
                                cache_dir=args.cache, on_done=progress)
    except DividesError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    wall = time.perf_counter() - started

    by_family: dict[str, Counter] = defaultdict(Counter)
    for s in landscapes:
        c = by_family[s.family]
        c[f"side {s.forced_side}"] += 1
        c[str(s.truth["moves_toward"])] += 1
        c["agrees"] += s.truth["moves_toward"] == s.expected
        c[s.split] += 1
    print(f"\n{'family':28s} {'side a':>6s} {'side b':>6s} {'to a':>5s} {'to b':>5s} {'stable':>6s} {'none':>5s} "
          f"{'=theory':>7s} {'train':>5s} {'held':>5s}")
    for f in FAMILIES:
        c = by_family.get(f, Counter())
        print(f"{f:28s} {c['side a']:6d} {c['side b']:6d} {c['a']:5d} {c['b']:5d} {c['stable']:6d} {c['None']:5d} "
              f"{c['agrees']:7d} {c['training']:5d} {c['held-out']:5d}")
    splits = Counter(s.split for s in landscapes)
    print(f"\nsplit: {splits['training']} training ({splits['training'] / len(landscapes):.0%}), "
          f"{splits['held-out']} held out")

    seconds = [s.seconds for s in landscapes]
    cells = [s.elevation.size for s in landscapes]
    per_cell = sum(seconds) / sum(cells)
    lo, hi = B.RANGES["grid_cells"]
    full_mean_cells = ((lo + hi) / 2) ** 2
    workers = max(1, args.workers)
    print(f"time per landscape (build, one process): mean {sum(seconds) / len(seconds):.1f} s, "
          f"min {min(seconds):.1f} s, max {max(seconds):.1f} s; mean grid {sum(cells) / len(cells):.0f} cells")
    print(f"this run: {wall:.0f} s wall on {workers} worker(s) (cached records cost only reading)")
    print(f"300 landscapes like these: {300 * sum(seconds) / len(seconds) / workers / 60:.0f} min on {workers} worker(s); "
          f"300 over the full grid range ({lo}-{hi}, mean ~{full_mean_cells:.0f} cells, cost ~ cells): "
          f"{300 * per_cell * full_mean_cells / workers / 60:.0f} min on {workers} worker(s)")

    if args.out is not None:
        args.out.mkdir(parents=True, exist_ok=True)
        with open(args.out / "landscapes.csv", "w", newline="") as fh:
            writer = csv.DictWriter(fh, fieldnames=COLUMNS)
            writer.writeheader()
            for s in landscapes:
                writer.writerow(_row(s))
        if args.export:
            for s in landscapes:
                s.save(args.out / f"{s.index:05d}.npz")
        print(f"wrote {args.out / 'landscapes.csv'}" + (f" and {len(landscapes)} records" if args.export else ""))
    if args.assess:
        _baseline(landscapes, workers)
    return 0


if __name__ == "__main__":
    sys.exit(main())
