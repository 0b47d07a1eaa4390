"""Fit the verdict's decision model on the benchmark's training part and judge it on the held-out part (by hand).

    python tests/benchmarks/fit_verdict.py --n 300 --seed 0 --grid 120 260 \\
        --contrasts /work/benchrun/contrasts.jsonl --forward /work/benchrun/forward.jsonl \\
        [--write] [--png docs/validation_reliability.png]

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
   With ``--forward`` (JSON lines of the forward run's shift per landscape, made by
   :func:`divides.model.forward_run.forward_shift` and cached like the contrasts)
   a second model that also reads the forward run is selected and fitted the same way,
   on every training landscape that has a forward run (near-divide features 0 and
   ``near_missing`` 1 where the near-divide samples are too few), and judged with the
   full rule of :func:`divides.assess.verdict.decide` (divides/assess/verdict_model_forward.json).
4. Printed per part and per family: the confusion of truth and verdict and the
   targets of the verdict issue; the ECE; optionally a reliability diagram (PNG).

``--part training`` keeps the training part only (forward runs made, models selected and judged on it
alone; nothing written): the check of a change on training before any held-out landscape is run.
``--write forward`` writes the forward model only (the near-divide model file is left as it is).

``--shipped`` judges the models shipped in divides/assess/ as they are (nothing is fitted),
e.g. on a benchmark drawn with another master seed. ``--training-also SEED LO HI CONTRASTS
FORWARD`` (repeatable) adds every landscape of another benchmark to the training part (one
whose held-out part has already been judged), each with its own caches.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from collections import Counter
from pathlib import Path

import numpy as np

SIGNED_PREFIXES = ("z_", "cons_", "fwd_")
L2_GRID = (0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0)
HERE = Path(__file__).resolve().parents[2] / "divides" / "assess"
OUT = {False: HERE / "verdict_model.json", True: HERE / "verdict_model_forward.json"}


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


def _forward(recs: list[dict], seed: int, grid: tuple[int, int], path: Path) -> dict[int, float | None]:
    """The forward run's shift (cells into b) of every landscape, cached as JSON lines in ``path``."""
    import divides
    from divides.errors import DividesError
    from divides.model.benchmark import load_or_build
    from divides.model.forward_run import forward_shift

    done = {}
    if path.exists():
        for line in path.read_text().splitlines():
            rec = json.loads(line)
            v = rec["shift_cells"]
            done[rec["index"]] = v if v is not None and math.isfinite(v) else None  # NaN: the divide left the grid
    for r in recs:
        i = r["index"]
        if i in done:
            continue
        s = load_or_build(seed, i, grid=grid)
        t = time.perf_counter()
        try:
            a = divides.assess(s.dem(), s.sides["a"], s.sides["b"], closed_edges=s.closed_edges, robustness=False,
                               n_bootstrap=50, forward_run=False)
            value, err = forward_shift(a.dem, a.sides, theta=float(a.profiles.theta), n=float(a.config.n),
                                             closed_edges=tuple(a.config.closed_edges),
                                             channel_area_m2=float(a.channels.threshold.value_m2)).shift_cells, None
        except (DividesError, ValueError) as exc:
            value, err = None, str(exc)
        value = value if value is None or math.isfinite(value) else None
        with open(path, "a") as fh:
            fh.write(json.dumps({"index": i, "family": s.family, "truth": s.truth["moves_toward"], "shift_cells": value,
                                 "error": err, "seconds": time.perf_counter() - t}) + "\n")
        done[i] = value
        print(f"forward run #{i} {s.family}: {value} ({time.perf_counter() - t:.1f} s)", flush=True)
    return done


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


def _log_loss_sum(p: np.ndarray, truth) -> float:
    """Summed log loss of class probabilities ``p`` (rows in CLASSES order) against the true classes."""
    from divides.assess.calibration import CLASSES

    idx = np.array([CLASSES.index(v) for v in truth])
    return -float(np.sum(np.log(np.clip(p[np.arange(idx.size), idx], 1e-12, 1))))


def _cv_loss(x, y, names, l2, folds=5, seed=0):
    from divides.assess.calibration import fit

    rng = np.random.default_rng(seed)
    which = rng.permutation(len(y)) % folds
    loss = 0.0
    for k in range(folds):
        tr, te = which != k, which == k
        xa, ya = _mirror(x[tr], y[tr], names)
        model = fit(xa, ya, features=names, l2=l2)
        loss += _log_loss_sum(model.probabilities(x[te]), y[te])
    return loss / len(y)


def _shipped_loss(train: list[dict], forward: bool) -> float:
    """Log loss of the model shipped in divides/assess/ on ``train`` (the bar a refit must pass)."""
    from divides.assess.verdict import decision_model

    model = decision_model(forward=forward)
    p = model.probabilities(np.array([_row(r, model.features, forward) for r in train]))
    return _log_loss_sum(p, [r["truth"] for r in train]) / len(train)


def _row(r: dict, names: tuple[str, ...], forward: bool) -> list[float]:
    from divides.assess import evidence

    f = dict(r["f"]) if r["ok"] else {k: 0.0 for k in evidence.FEATURES}
    if forward:
        f.update(evidence.forward_features(r["fwd"], r["ok"]))
    return [f[n] for n in names]


def _out_of_fold(pool, names, l2, forward, near_model, args, folds=5, seed=0, veto=False):
    """The full decision rule on every training landscape, each decided by a model fitted without its fold.

    ``pool`` is the whole training part; only the landscapes the model can be fitted on (enough
    near-divide samples, or a forward run) enter the fits, and the others are decided as
    :func:`divides.assess` would decide them (insufficient data, or the near-divide model).
    """
    from divides.assess.calibration import TARGETS, fit, score
    from divides.assess.verdict import decide

    fits = np.array([(r["fwd"] is not None) if forward else r["ok"] for r in pool])
    which = np.random.default_rng(seed).permutation(len(pool)) % folds
    y = np.array([r["truth"] for r in pool])
    said, conf = ["undetermined"] * len(pool), [0.0] * len(pool)
    for k in range(folds):
        sel = fits & (which != k)
        x = np.array([_row(r, names, forward) for r in np.array(pool, dtype=object)[sel]])
        model = fit(*_mirror(x, y[sel], names), features=names, l2=l2)
        for i in np.flatnonzero(which == k):
            r = pool[i]
            shift = r["fwd"] if (forward or veto) else None
            if not r["c"] and shift is None:
                continue  # refused: undetermined
            v = decide(r["c"], model=model if (shift is not None or not forward) else near_model,
                       min_confidence=args.min_confidence, forward_shift=shift, forward_in_decision=forward,
                       near_model=near_model)
            said[i], conf[i] = v.moves_toward, v.confidence
    card = score(list(y), said, conf)
    print(f"training, out of fold ({len(pool)} landscapes; the full rule{'; forward run as veto' if veto else ''}):")
    for k, v in card.shares.items():
        bound, kind = TARGETS[k]
        print(f"  {k.replace('_', ' '):38s} {v:.3f}  (target {'>=' if kind == 'min' else '<='} {bound:g})")
    return card


def _select_and_judge(recs, args, *, forward=False, near_model=None):
    from divides.assess import evidence
    from divides.assess.calibration import fit

    train = [r for r in recs if r["split"] == "training" and (r["fwd"] is not None if forward else r["ok"])]
    print(f"{len(recs)} landscapes with a truth; training landscapes fitted on: {len(train)} "
          f"(of {sum(r['split'] == 'training' for r in recs)} training)")

    # ---- model selection on the training part only
    subsets = {
        "all": evidence.FEATURES,
        "no chi": tuple(f for f in evidence.FEATURES if f != "z_chi"),
        "z only": tuple(f for f in evidence.FEATURES if f.startswith(("z_", "abs_")) or f in ("log_n_eff", "balanced")),
        "z only, no chi": tuple(f for f in evidence.FEATURES if (f.startswith("z_") and f != "z_chi")
                                or f.startswith("abs_") or f in ("log_n_eff", "balanced")),
        "no magnitudes": tuple(f for f in evidence.FEATURES if not f.startswith("abs_")),
        "z, no magnitudes": tuple(f for f in evidence.FEATURES if f.startswith("z_") or f in ("log_n_eff", "balanced")),
    }
    if forward:
        subsets = {k: v + evidence.FORWARD_FEATURES for k, v in subsets.items()}
        subsets["forward run only"] = evidence.FORWARD_FEATURES
    y = np.array([r["truth"] for r in train])
    results = []
    for label, names in subsets.items():
        x = np.array([_row(r, names, forward) for r in train])
        for l2 in L2_GRID:
            results.append((_cv_loss(x, y, names, l2), label, l2))
    results.sort()
    print("cross-validated log loss (training only), best first:")
    for loss, label, l2 in results[:8]:
        print(f"  {loss:.4f}  {label:18s} l2 = {l2:g}")
    _, label, l2 = results[0]
    names = subsets[label]
    shipped = _shipped_loss(train, forward)
    print(f"  {shipped:.4f}  the shipped model on the same training landscapes (in sample where it was fitted)")
    x = np.array([_row(r, names, forward) for r in train])
    model = fit(*_mirror(x, y, names), features=names, l2=l2)
    _out_of_fold([r for r in recs if r["split"] == "training"], names, l2, forward, near_model or model, args)
    return (model, label, l2, results, _judge(recs, args, model, forward=forward, near_model=near_model))


def _judge(recs, args, model, *, forward=False, near_model=None, veto=False):
    """Decide every landscape by the full rule and print the figures per part and family."""
    from divides.assess.calibration import TARGETS, expected_calibration_error, reliability, score, top_label
    from divides.assess.verdict import decide

    for r in recs:
        shift = r["fwd"] if (forward or veto) else None
        # without a forward run (it failed) the near-divide model decides, as in divides.assess
        v = decide(r["c"], model=model if (shift is not None or not forward) else near_model,
                   min_confidence=args.min_confidence, forward_shift=shift, forward_in_decision=forward,
                   near_model=near_model) if (r["c"] or shift is not None) else None
        r["said"] = v.moves_toward if v else "undetermined"
        r["conf"] = v.confidence if v else 0.0
        r["reason"] = v.reason if v else "refused"
        r["p"] = None if (v is None or v.probabilities is None) else [v.probabilities[k] for k in ("a", "b", "stable")]
    summary = {}
    for part in _parts(args):
        sel = [r for r in recs if part == "all" or r["split"] == part]
        card = score([r["truth"] for r in sel], [r["said"] for r in sel], [r["conf"] for r in sel])
        met = card.met()
        probs = [r for r in sel if r["p"] is not None]
        conf, ok = top_label(np.array([r["p"] for r in probs]), [r["truth"] for r in probs])
        ece = expected_calibration_error(conf, ok)
        summary[part] = {"card": card, "ece": ece, "bins": reliability(conf, ok), "n_model": len(probs)}
        print(f"\n{part}: {card.n} landscapes, {len(probs)} reach the model; ECE {ece:.3f} (target <= 0.05)")
        for k, v in card.shares.items():
            bound, kind = TARGETS[k]
            print(f"  {k.replace('_', ' '):38s} {v:.3f}  (target {'>=' if kind == 'min' else '<='} {bound:g}: "
                  f"{'met' if met[k] else 'missed'})")
        print("  reasons: " + ", ".join(f"{k} {v}" for k, v in sorted(Counter(r["reason"] for r in sel).items())))
        print("\n  | family | moving | right | wrong way | called stable | undetermined | stable | called stable "
              "| given a direction | undetermined |\n  | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
        for f in sorted({r["family"] for r in sel}):
            mv = [r for r in sel if r["family"] == f and r["truth"] != "stable"]
            st = [r for r in sel if r["family"] == f and r["truth"] == "stable"]
            print(f"  | {f} | {len(mv)} | {sum(r['said'] == r['truth'] for r in mv)} | "
                  f"{sum(r['said'] in ('a', 'b') and r['said'] != r['truth'] for r in mv)} | "
                  f"{sum(r['said'] == 'stable' for r in mv)} | {sum(r['said'] == 'undetermined' for r in mv)} | "
                  f"{len(st)} | {sum(r['said'] == 'stable' for r in st)} | {sum(r['said'] in ('a', 'b') for r in st)} | "
                  f"{sum(r['said'] == 'undetermined' for r in st)} |")
        print("  reliability bins (lower, count, mean confidence, accuracy): " + "; ".join(
            f"{b.lower:.1f} {b.count} {b.mean_confidence:.2f} {b.accuracy:.2f}" for b in summary[part]["bins"] if b.count))
    wrong = [(r["set"], r["index"], r["split"], r["family"], r["truth"], r["said"], r["conf"]) for r in recs
             if r["said"] in ("a", "b") and r["said"] != r["truth"]]
    print("\nwrong directions:", wrong)
    return summary


def _document(model, label, l2, results, summary, args) -> dict:
    doc = model.to_dict()
    doc["selection"] = {"features": label, "l2": l2, "cv_log_loss": results[0][0], "training_cases": model.n_train // 2,
                        "benchmark": {"seed": args.seed, "n": args.n, "grid": list(args.grid)},
                        "training_also": [{"seed": int(a), "n": args.n, "grid": [int(lo), int(hi)]}
                                          for a, lo, hi, _, _ in args.training_also]}
    doc["held_out_reliability"] = [
        {"lower": b.lower, "upper": b.upper, "count": b.count,
         "mean_confidence": None if not b.count else round(b.mean_confidence, 4),
         "accuracy": None if not b.count else round(b.accuracy, 4)} for b in summary["held-out"]["bins"]]
    print("\nmodel (coefficients on standardised features):")
    for c, row in doc["coefficients"].items():
        print(f"  {c:7s} intercept {doc['intercepts'][c]:+.3f}  " + "  ".join(f"{k} {v:+.3f}" for k, v in row.items()))
    return doc


def _parts(args) -> tuple[str, ...]:
    """The parts judged: training and held-out, or one part of every landscape (``--pooled``)."""
    if args.pooled:
        return ("all",)
    return ("training",) if args.part == "training" else ("training", "held-out")


def _diagram(summaries: dict, path: Path) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, len(summaries), figsize=(4.5 * len(summaries), 4.5), squeeze=False)
    for ax, (title, summary) in zip(axes[0], summaries.items()):
        for part, mark in (("training", "s"), ("held-out", "o"), ("all", "o")):
            if part not in summary:
                continue
            bins = [b for b in summary[part]["bins"] if b.count]
            ax.plot([b.mean_confidence for b in bins], [b.accuracy for b in bins], marker=mark, label=
                    f"{part} (ECE {summary[part]['ece']:.3f}, {summary[part]['n_model']} cases)")
        ax.plot([0, 1], [0, 1], color="grey", lw=0.8, ls="--")
        ax.set_title(title, fontsize=10)
        ax.set_xlabel("confidence (probability of the most probable outcome)")
        ax.set_ylabel("share right")
        ax.set_xlim(0.3, 1)
        ax.set_ylim(0, 1.02)
        ax.legend(fontsize=8, loc="upper left")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    print(f"wrote {path}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--n", type=int, default=300)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--grid", type=int, nargs=2, default=(120, 260))
    parser.add_argument("--contrasts", type=Path, default=Path("/work/benchrun/contrasts.jsonl"))
    parser.add_argument("--available", action="store_true", help="use only landscapes already in --contrasts")
    parser.add_argument("--min-confidence", type=float, default=0.8)
    parser.add_argument("--write", nargs="?", const="both", choices=("both", "forward"), default=None,
                        help="write both models (or with 'forward' the forward model only) into divides/assess/")
    parser.add_argument("--part", choices=("all", "training"), default="all",
                        help="'training': the training part alone (nothing held out is run or judged; no --write)")
    parser.add_argument("--forward", type=Path, default=None,
                        help="JSON lines of forward-run shifts (index, shift_cells; made when missing): fit and judge "
                             "the model that also reads the forward run")
    parser.add_argument("--png", type=Path, default=None, help="reliability diagram (training and held-out)")
    parser.add_argument("--shipped", action="store_true", help="judge the shipped models as they are (no fit)")
    parser.add_argument("--pooled", action="store_true",
                        help="with --shipped: judge every landscape as one part (a draw nothing was fitted on)")
    parser.add_argument("--training-also", nargs=5, action="append", default=[],
                        metavar=("SEED", "LO", "HI", "CONTRASTS", "FORWARD"),
                        help="another benchmark whose landscapes all join the training part")
    args = parser.parse_args(argv)
    if args.part == "training" and (args.write or args.pooled or args.training_also):
        parser.error("--part training judges the training part alone: no --write, --pooled or --training-also")
    if args.write == "forward" and args.forward is None:
        parser.error("--write forward needs --forward (the forward runs' shifts)")

    from divides.assess import evidence

    sets = [(args.seed, tuple(args.grid), args.contrasts, args.forward, False)]
    # the other benchmarks' forward runs are read only when the fit reads forward runs at all
    sets += [(int(a), (int(lo), int(hi)), Path(c), None if args.forward is None else Path(f), True)
             for a, lo, hi, c, f in args.training_also]
    recs = []
    for seed, grid, contrasts, forward, all_training in sets:
        if args.available:
            part = sorted((json.loads(l) for l in contrasts.read_text().splitlines()), key=lambda r: r["index"])
            part = [r for r in part if r["index"] < args.n]
        else:
            part = _extract(args.n, seed, grid, contrasts)
        part = [r for r in part if r["truth"] is not None and (args.part == "all" or r["split"] == "training")]
        shifts = {} if forward is None else _forward(part, seed, grid, forward)
        for r in part:
            r["set"] = f"seed {seed}, grid {grid[0]}-{grid[1]}"
            r["split"] = "training" if all_training else r["split"]
            r["c"] = _contrasts(r)
            r["ok"] = bool(r["c"]) and evidence.sufficient(r["c"])
            r["f"] = evidence.features(r["c"]) if r["ok"] else None
            r["fwd"] = shifts.get(r["index"])
        recs += part
    if args.shipped:
        from divides.assess.verdict import decision_model

        near, forward_model = decision_model(), decision_model(forward=True)
        summaries = {}
        print("\n==== shipped: near-divide model alone")
        summaries["near-divide measures"] = _judge(recs, args, near, near_model=near)
        if args.forward is not None:
            print("\n==== shipped: near-divide model, forward run as veto (the default of divides assess)")
            summaries["shipped default (veto)"] = _judge(recs, args, near, near_model=near, veto=True)
            print("\n==== shipped: forward run in the model (--forward-in-decision)")
            summaries["forward run in the model"] = _judge(recs, args, forward_model, forward=True, near_model=near)
        if args.png is not None:
            _diagram(summaries, args.png)
        return 0
    print("\n==== near-divide measures only")
    near = _select_and_judge(recs, args)
    held = args.part == "all"  # the documents carry held-out reliability bins
    docs, summaries = {False: _document(*near, args)} if held else {}, {"near-divide measures": near[4]}
    if args.forward is not None:
        print("\n==== near-divide measures and the forward run")
        fwd = _select_and_judge(recs, args, forward=True, near_model=near[0])
        if held:
            docs[True] = _document(*fwd, args)
        summaries["forward run in the model"] = fwd[4]
        print("\n==== near-divide measures decide, the forward run can only veto (lines disagree)")
        names = near[0].features
        _out_of_fold([r for r in recs if r["split"] == "training"], names, near[2], False, near[0], args, veto=True)
        summaries["forward run as veto"] = _judge(recs, args, near[0], near_model=near[0], veto=True)
    if args.write:
        for forward, doc in docs.items():
            if args.write == "forward" and not forward:
                continue
            OUT[forward].write_text(json.dumps(doc, indent=1, allow_nan=False) + "\n")
            print(f"wrote {OUT[forward]}")
    if args.png is not None:
        _diagram(summaries, args.png)
    return 0


if __name__ == "__main__":
    sys.exit(main())
