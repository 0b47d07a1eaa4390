"""Fit the verdict's decision model on the benchmark's training part and judge it on the held-out part (by hand).

    python tests/benchmarks/fit_verdict.py --n 300 --seed 0 --grid 120 260 \\
        --contrasts /work/benchrun/contrasts.jsonl [--write] [--png docs/validation_reliability.png]

1. Every benchmark landscape (``divides.model.benchmark``; records read from the
   cache, built if missing) is assessed with robustness re-runs off and 200
   bootstrap resamples; its contrasts are appended to ``--contrasts`` (a JSON-lines
   file outside the repository), so refits cost nothing.
2. Training part only (``split_of``): landscapes with enough near-divide data, each
   also mirrored (signed features negated, a and b swapped: the physics has no
   preferred side). The penalty and the feature set are chosen by 5-fold
   cross-validation (folds by landscape) on the out-of-fold log loss.
3. The chosen model is refitted on the whole training part; its held-out
   reliability bins are stored with it (``--write``: divides/assess/verdict_model.json).
4. Printed per part and per family: the confusion of truth and verdict and the
   targets of the verdict issue; the ECE; optionally a reliability diagram (PNG).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from collections import Counter, defaultdict
from pathlib import Path

import numpy as np

SIGNED_PREFIXES = ("z_", "cons_", "fwd_")
L2_GRID = (0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0)
OUT = Path(__file__).resolve().parents[2] / "divides" / "assess" / "verdict_model.json"


def _extract(n: int, seed: int, grid: tuple[int, int], path: Path) -> list[dict]:
    import divides
    from divides.errors import DividesError
    from divides.model.benchmark import load_or_build

    done = {}
    if path.exists():
        for line in path.read_text().splitlines():
            rec = json.loads(line)
            done[rec["index"]] = rec
    for i in range(n):
        if i in done:
            continue
        s = load_or_build(seed, i, grid=grid)
        t = time.perf_counter()
        rec = {"index": s.index, "seed": s.seed, "split": s.split, "family": s.family, "forced_side": s.forced_side,
               "truth": s.truth["moves_toward"], "cell": s.cell_size, "shape": list(s.elevation.shape),
               "noise": s.dem_error, "sides": s.sides["kind"]}
        try:
            a = divides.assess(s.dem(), s.sides["a"], s.sides["b"], closed_edges=s.closed_edges, robustness=False,
                               n_bootstrap=200)
            rec.update(contrasts=[c.to_dict() for c in a.contrasts], refused=None)
        except DividesError as exc:  # a refusal is an undetermined verdict
            rec.update(contrasts=None, refused=str(exc))
        rec["seconds"] = time.perf_counter() - t
        with open(path, "a") as fh:
            fh.write(json.dumps(rec) + "\n")
        done[i] = rec
        print(f"assessed #{i} {s.family} ({rec['seconds']:.1f} s)", flush=True)
    return [done[i] for i in range(n)]


def _contrasts(rec: dict) -> list:
    from divides.assess.contrasts import Contrast

    out = []
    for d in rec["contrasts"] or []:
        d = dict(d)
        d["ci95"] = tuple(math.nan if v is None else v for v in d["ci95"])
        for k in ("a", "b", "difference", "consistency", "n_effective"):
            d[k] = math.nan if d[k] is None else d[k]
        out.append(Contrast(**d))
    return out


def _mirror(x: np.ndarray, y: np.ndarray, names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
    signed = np.array([n.startswith(SIGNED_PREFIXES) for n in names])
    xm = x.copy()
    xm[:, signed] *= -1.0
    ym = np.array([{"a": "b", "b": "a"}.get(v, v) for v in y])
    return np.vstack([x, xm]), np.concatenate([y, ym])


def _cv_loss(x, y, names, l2, folds=5, seed=0):
    from divides.assess.calibration import CLASSES, fit

    rng = np.random.default_rng(seed)
    which = rng.permutation(len(y)) % folds
    loss = 0.0
    for k in range(folds):
        tr, te = which != k, which == k
        xa, ya = _mirror(x[tr], y[tr], names)
        model = fit(xa, ya, features=names, l2=l2)
        p = model.probabilities(x[te])
        idx = np.array([CLASSES.index(v) for v in y[te]])
        loss -= float(np.sum(np.log(np.clip(p[np.arange(idx.size), idx], 1e-12, 1))))
    return loss / len(y)


def _select_and_judge(recs, args, extra=()):
    from divides.assess import evidence
    from divides.assess.calibration import TARGETS, expected_calibration_error, fit, reliability, score, top_label
    from divides.assess.verdict import decide

    train = [r for r in recs if r["split"] == "training" and r["ok"]]
    print(f"{len(recs)} landscapes with a truth; training with enough data: {len(train)} "
          f"(of {sum(r['split'] == 'training' for r in recs)} training)")

    # ---- model selection on the training part only
    subsets = {
        "all": evidence.FEATURES,
        "no chi": tuple(f for f in evidence.FEATURES if f != "z_chi"),
        "z only": tuple(f for f in evidence.FEATURES if f.startswith(("z_", "abs_")) or f in ("log_n_eff", "balanced")),
        "z only, no chi": tuple(f for f in evidence.FEATURES if (f.startswith("z_") and f != "z_chi")
                                or f.startswith("abs_") or f in ("log_n_eff", "balanced")),
        "no magnitudes": tuple(f for f in evidence.FEATURES if not f.startswith("abs_")),
    }
    subsets = {k: v + tuple(extra) for k, v in subsets.items()}
    y = np.array([r["truth"] for r in train])
    results = []
    for label, names in subsets.items():
        x = np.array([[{**r["f"], **r["x"]}[n] for n in names] for r in train])
        for l2 in L2_GRID:
            results.append((_cv_loss(x, y, names, l2), label, l2))
    results.sort()
    print("cross-validated log loss (training only), best first:")
    for loss, label, l2 in results[:8]:
        print(f"  {loss:.4f}  {label:16s} l2 = {l2:g}")
    _, label, l2 = results[0]
    names = subsets[label]
    x = np.array([[{**r["f"], **r["x"]}[n] for n in names] for r in train])
    model = fit(*_mirror(x, y, names), features=names, l2=l2)

    # ---- decisions on every landscape (insufficient data: undetermined)
    for r in recs:
        v = decide(r["c"], model=model, min_confidence=args.min_confidence, extra=r["x"]) if r["c"] else None
        r["said"] = v.moves_toward if v else "undetermined"
        r["conf"] = v.confidence if v else 0.0
        r["p"] = None if (v is None or v.probabilities is None) else [v.probabilities[k] for k in ("a", "b", "stable")]
    summary = {}
    for part in ("training", "held-out"):
        sel = [r for r in recs if r["split"] == part]
        card = score([r["truth"] for r in sel], [r["said"] for r in sel], [r["conf"] for r in sel])
        met = card.met()
        probs = [r for r in sel if r["p"] is not None]
        conf, ok = top_label(np.array([r["p"] for r in probs]), [r["truth"] for r in probs])
        ece = expected_calibration_error(conf, ok)
        summary[part] = {"card": card, "ece": ece, "bins": reliability(conf, ok), "n_model": len(probs)}
        print(f"\n{part}: {card.n} landscapes, {len(probs)} with enough data; ECE {ece:.3f} (target <= 0.05)")
        for k, v in card.shares.items():
            bound, kind = TARGETS[k]
            print(f"  {k.replace('_', ' '):38s} {v:.3f}  (target {'>=' if kind == 'min' else '<='} {bound:g}: "
                  f"{'met' if met[k] else 'missed'})")
        fam: dict = defaultdict(Counter)
        for r in sel:
            fam[r["family"]][(r["truth"], r["said"])] += 1
        print(f"\n  | family | moving | right | wrong way | called stable | undetermined | stable | called stable "
              f"| given a direction | undetermined |\n  | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
        for f in sorted({r["family"] for r in sel}):
            mv = [r for r in sel if r["family"] == f and r["truth"] != "stable"]
            st = [r for r in sel if r["family"] == f and r["truth"] == "stable"]
            print(f"  | {f} | {len(mv)} | {sum(r['said'] == r['truth'] for r in mv)} | "
                  f"{sum(r['said'] in ('a', 'b') and r['said'] != r['truth'] for r in mv)} | "
                  f"{sum(r['said'] == 'stable' for r in mv)} | {sum(r['said'] == 'undetermined' for r in mv)} | "
                  f"{len(st)} | {sum(r['said'] == 'stable' for r in st)} | {sum(r['said'] in ('a', 'b') for r in st)} | "
                  f"{sum(r['said'] == 'undetermined' for r in st)} |")
        print(f"  {'family':28s} truth -> verdict counts")
        for f in sorted(fam):
            print(f"  {f:28s} " + ", ".join(f"{t}->{s}: {c}" for (t, s), c in sorted(fam[f].items())))
        print("  reliability bins (lower, count, mean confidence, accuracy): " + "; ".join(
            f"{b.lower:.1f} {b.count} {b.mean_confidence:.2f} {b.accuracy:.2f}" for b in summary[part]["bins"] if b.count))
    wrong_hi = [(r["index"], r["family"], r["truth"], r["said"], r["conf"]) for r in recs
                if r["said"] in ("a", "b") and r["said"] != r["truth"]]
    print("\nwrong directions:", wrong_hi)
    return model, label, l2, results, summary


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--n", type=int, default=300)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--grid", type=int, nargs=2, default=(120, 260))
    parser.add_argument("--contrasts", type=Path, default=Path("/work/benchrun/contrasts.jsonl"))
    parser.add_argument("--available", action="store_true", help="use only landscapes already in --contrasts")
    parser.add_argument("--min-confidence", type=float, default=0.8)
    parser.add_argument("--write", action="store_true", help="write divides/assess/verdict_model.json")
    parser.add_argument("--forward", type=Path, default=None,
                        help="JSON lines of forward-run shifts (index, shift_cells): fit and judge a second model "
                             "with the forward run as a feature (reported, not shipped)")
    parser.add_argument("--png", type=Path, default=None, help="reliability diagram of the held-out part")
    args = parser.parse_args(argv)

    from divides.assess import evidence

    if args.available:
        recs = sorted((json.loads(l) for l in args.contrasts.read_text().splitlines()), key=lambda r: r["index"])
        recs = [r for r in recs if r["index"] < args.n]
    else:
        recs = _extract(args.n, args.seed, tuple(args.grid), args.contrasts)
    recs = [r for r in recs if r["truth"] is not None]
    for r in recs:
        r["c"] = _contrasts(r)
        r["ok"] = bool(r["c"]) and evidence.sufficient(r["c"])
        r["f"] = evidence.features(r["c"]) if r["ok"] else None
    fwd = {}
    if args.forward is not None:
        for line in args.forward.read_text().splitlines():
            rec = json.loads(line)
            fwd[rec["index"]] = rec["shift_cells"]
    if fwd:
        with_fwd = [r for r in recs if r["index"] in fwd]
        print(f"\n==== with the forward run (on the {len(with_fwd)} landscapes that have it; reported, not shipped)")
        for r in with_fwd:
            v = fwd[r["index"]]
            v = 0.0 if v is None or not math.isfinite(v) else v
            r["x"] = {"fwd_shift": math.copysign(math.log1p(abs(v)), v), "abs_fwd": math.log1p(abs(v))}
        _select_and_judge(with_fwd, args, extra=("fwd_shift", "abs_fwd"))
        print("\n==== the same landscapes without it")
        for r in with_fwd:
            r["x"] = {}
        _select_and_judge(with_fwd, args)
        print("\n==== metric-only model on every landscape (shipped)")
    for r in recs:
        r["x"] = {}
    model, label, l2, results, summary = _select_and_judge(recs, args)
    doc = model.to_dict()
    doc["selection"] = {"features": label, "l2": l2, "cv_log_loss": results[0][0], "training_cases": model.n_train // 2,
                        "benchmark": {"seed": args.seed, "n": args.n, "grid": list(args.grid)}}
    doc["held_out_reliability"] = [
        {"lower": b.lower, "upper": b.upper, "count": b.count,
         "mean_confidence": None if not b.count else round(b.mean_confidence, 4),
         "accuracy": None if not b.count else round(b.accuracy, 4)} for b in summary["held-out"]["bins"]]
    print("\nmodel (coefficients on standardised features):")
    for c, row in doc["coefficients"].items():
        print(f"  {c:7s} intercept {doc['intercepts'][c]:+.3f}  " + "  ".join(f"{k} {v:+.3f}" for k, v in row.items()))
    if args.write:
        OUT.write_text(json.dumps(doc, indent=1, allow_nan=False) + "\n")
        print(f"wrote {OUT}")
    if args.png is not None:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt

        fig, ax = plt.subplots(figsize=(4.5, 4.5))
        for part, mark in (("training", "s"), ("held-out", "o")):
            bins = [b for b in summary[part]["bins"] if b.count]
            ax.plot([b.mean_confidence for b in bins], [b.accuracy for b in bins], marker=mark, label=
                    f"{part} (ECE {summary[part]['ece']:.3f}, {summary[part]['n_model']} cases)")
        ax.plot([0, 1], [0, 1], color="grey", lw=0.8, ls="--")
        ax.set_xlabel("confidence (probability of the most probable outcome)")
        ax.set_ylabel("share right")
        ax.set_xlim(0.3, 1)
        ax.set_ylim(0, 1.02)
        ax.legend(fontsize=8, loc="upper left")
        fig.tight_layout()
        fig.savefig(args.png, dpi=120)
        print(f"wrote {args.png}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
