"""Combine the two shipped decisions of ``divides assess`` and judge the combinations (by hand, not a test).

    python tests/benchmarks/combine_verdict.py \\
        --draw 0 120 260 300 /work/benchrun/s5/contrasts_s0.jsonl /work/benchrun/s5/forward_s0.jsonl \\
        --draw 1 120 400 300 /work/benchrun/s5/contrasts_s1.jsonl /work/benchrun/s5/forward_s1.jsonl ...

    python tests/benchmarks/combine_verdict.py --seed 4 --grid 120 400 --n 100 \\
        --contrasts CONTRASTS --forward FORWARD      # one draw, judged with the chosen candidate

With ``--seed``, one draw is judged with the chosen candidate (``CHOSEN``) by the rule written for a fresh
draw: adopt it iff wrong directions <= the default's + 0.01, wrong at >= 0.9 <= the default's, moving called
stable <= 0.05 and ECE <= 0.05. No candidate was chosen on seeds 0-3, so this prints the figures only.

Every landscape of each draw (cached records of ``fit_verdict.py``; missing ones are built as there) is
decided by both shipped decisions exactly as ``fit_verdict.py --shipped`` decides them (its ``_judge``):

- D, the default: the near-divide model with the forward run as veto;
- F, the model that reads the forward run (``--forward-in-decision``).

The combinations (defined before they were evaluated; docs/validation.md, "A combined decision"):

- C1: D; where D abstains, F's "stable" only (never its direction);
- C2: D; where D abstains, F's call c unless the near-divide probabilities q favour the opposite
  (q[other direction] > q[c] for a direction, max(q[a], q[b]) > q[stable] for "stable"; no q: taken);
- C3: F's call where the near-divide model's most probable outcome is the same, else D.

A call carries the confidence and probabilities of the model that made it. Printed per draw and pooled:
right direction among moving, wrong direction among all, stable called stable, stable given a direction,
wrong direction at >= 0.9, moving called stable, ECE (as ``fit_verdict.py``: top label, 10 bins).
"""

from __future__ import annotations

import argparse
import contextlib
import io
import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import fit_verdict as fv  # noqa: E402  (the shipped decisions, not re-implemented)

# Chosen on seeds 0-3 by the rule written before evaluation: none qualified (C1 calls 3.6 % of the moving
# landscapes stable, C2 and C3 add wrong directions at >= 0.9), so no candidate is proposed (docs/validation.md).
CHOSEN: str | None = None
OTHER = {"a": "b", "b": "a"}
FIGURES = ("right among moving", "wrong among all", "stable called stable", "stable given a direction",
           "wrong at >= 0.9", "moving called stable", "ECE (cases)")


def _records(seed: int, grid: tuple[int, int], n: int, contrasts: Path, forward: Path) -> list[dict]:
    """The landscapes of one draw with a truth, prepared as ``fit_verdict.main`` prepares them."""
    from divides.assess import evidence

    recs = [r for r in fv._extract(n, seed, grid, contrasts) if r["truth"] is not None]
    shifts = fv._forward(recs, seed, grid, forward)
    for r in recs:
        r["set"] = f"seed {seed}"
        r["c"] = fv._contrasts(r)
        r["ok"] = bool(r["c"]) and evidence.sufficient(r["c"])
        r["f"] = evidence.features(r["c"]) if r["ok"] else None
        r["fwd"] = shifts.get(r["index"])
    return recs


def _both(recs: list[dict], min_confidence: float) -> None:
    """Store D's and F's call, confidence and probabilities in every record (``fit_verdict._judge``, silenced)."""
    from divides.assess.verdict import decision_model

    near, fwd_model = decision_model(), decision_model(forward=True)
    args = SimpleNamespace(min_confidence=min_confidence, pooled=True, part="all")
    for key, model, kw in (("D", near, {"veto": True}), ("F", fwd_model, {"forward": True})):
        with contextlib.redirect_stdout(io.StringIO()):
            fv._judge(recs, args, model, near_model=near, **kw)
        for r in recs:
            r[key] = (r["said"], r["conf"], r["p"])


def _favours_opposite(q: list[float] | None, call: str) -> bool:
    if q is None:
        return False
    p = dict(zip(("a", "b", "stable"), q))
    against = max(p["a"], p["b"]) if call == "stable" else p[OTHER[call]]
    return against > p[call]


def combine(r: dict, rule: str) -> tuple[str, float, list[float] | None]:
    """The call, confidence and probabilities of one landscape under ``rule`` (D, F, C1, C2, C3)."""
    d, f = r["D"], r["F"]
    if rule in ("D", "F"):
        return r[rule]
    if rule == "C3":
        q = d[2]
        agree = f[0] != "undetermined" and q is not None and int(np.argmax(q)) == ("a", "b", "stable").index(f[0]) \
            and sorted(q)[-1] > sorted(q)[-2]
        return f if agree else d
    if d[0] != "undetermined" or f[0] == "undetermined":
        return d
    if rule == "C1":
        return f if f[0] == "stable" else d
    if rule == "C2":
        return d if _favours_opposite(d[2], f[0]) else f
    raise ValueError(f"unknown rule {rule!r}: D, F, C1, C2 or C3")


def figures(recs: list[dict], rule: str) -> dict:
    """The table's figures of ``rule`` on ``recs`` (printed strings; the raw shares under keys starting "_")."""
    from divides.assess.calibration import expected_calibration_error, score, top_label

    out = [combine(r, rule) for r in recs]
    truth = [r["truth"] for r in recs]
    card = score(truth, [o[0] for o in out], [o[1] for o in out]).shares
    moving = [o[0] for o, t in zip(out, truth) if t != "stable"]
    probs = [(o[2], t) for o, t in zip(out, truth) if o[2] is not None]
    conf, ok = top_label(np.array([p for p, _ in probs]), [t for _, t in probs])
    ece = expected_calibration_error(conf, ok)
    return {"right among moving": f"{card['right_direction_among_moving']:.3f}",
            "wrong among all": f"{card['wrong_direction_among_all']:.3f}",
            "stable called stable": f"{card['stable_called_stable']:.3f}",
            "stable given a direction": f"{card['stable_given_a_direction']:.3f}",
            "wrong at >= 0.9": f"{card['wrong_direction_at_high_confidence']:.3f}",
            "moving called stable": f"{sum(s == 'stable' for s in moving) / len(moving):.3f}",
            "ECE (cases)": f"{ece:.3f} ({len(probs)})",
            "_raw": card, "_moving_stable": sum(s == "stable" for s in moving) / len(moving), "_ece": ece}


def _table(groups: dict[str, list[dict]], rules: tuple[str, ...]) -> None:
    print("| part | decision | " + " | ".join(FIGURES) + " |\n| " + " | ".join(["---"] * (len(FIGURES) + 2)) + " |")
    for label, recs in groups.items():
        n_st = sum(r["truth"] == "stable" for r in recs)
        for rule in rules:
            fig = figures(recs, rule)
            print(f"| {label} ({len(recs)}, {n_st} stable) | {rule} | " + " | ".join(fig[k] for k in FIGURES) + " |")


def _choose(pooled: list[dict]) -> str | None:
    """The choice rule written before evaluation (pooled seeds 0-3)."""
    base = figures(pooled, "D")["_raw"]
    best, best_val = None, -1.0
    for rule in ("C1", "C2", "C3"):
        fig = figures(pooled, rule)
        s = fig["_raw"]
        ok = (s["wrong_direction_among_all"] <= base["wrong_direction_among_all"] + 0.005 + 1e-12
              and s["wrong_direction_at_high_confidence"] <= base["wrong_direction_at_high_confidence"] + 1e-12
              and fig["_moving_stable"] <= 0.03)
        val = s["right_direction_among_moving"] + s["stable_called_stable"]
        print(f"  {rule}: qualifies {ok}; right among moving + stable called stable = {val:.3f}")
        if ok and val > best_val + 1e-12:
            best, best_val = rule, val
    return best


def _verdict_on_draw(recs: list[dict], rule: str) -> None:
    """The rule for the fresh draw: adopt ``rule`` iff (a)-(d) hold (written before the draw was judged)."""
    base, fig = figures(recs, "D"), figures(recs, rule)
    b, s = base["_raw"], fig["_raw"]
    checks = {"(a) wrong <= default + 0.01": s["wrong_direction_among_all"] <= b["wrong_direction_among_all"] + 0.01,
              "(b) wrong at >= 0.9 <= default's": s["wrong_direction_at_high_confidence"]
              <= b["wrong_direction_at_high_confidence"],
              "(c) moving called stable <= 0.05": fig["_moving_stable"] <= 0.05,
              "(d) ECE <= 0.05": fig["_ece"] <= 0.05}
    for k, v in checks.items():
        print(f"  {k}: {'holds' if v else 'fails'}")
    print(f"adopt {rule} as the default: {'yes' if all(checks.values()) else 'no'}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--draw", nargs=6, action="append", default=[],
                        metavar=("SEED", "LO", "HI", "N", "CONTRASTS", "FORWARD"),
                        help="a draw to judge (repeatable): table per draw, pooled, and the choice among C1-C3")
    parser.add_argument("--seed", type=int, help="a single draw judged with the chosen candidate")
    parser.add_argument("--grid", type=int, nargs=2, default=(120, 400))
    parser.add_argument("--n", type=int, default=100)
    parser.add_argument("--contrasts", type=Path)
    parser.add_argument("--forward", type=Path)
    parser.add_argument("--min-confidence", type=float, default=0.8)
    args = parser.parse_args(argv)
    single = args.seed is not None
    if single == bool(args.draw) or (single and (args.contrasts is None or args.forward is None)):
        parser.error("give either --draw ... (repeatable) or --seed with --contrasts and --forward")
    draws = [(int(s), (int(lo), int(hi)), int(n), Path(c), Path(f)) for s, lo, hi, n, c, f in args.draw]
    if single:
        draws = [(args.seed, tuple(args.grid), args.n, args.contrasts, args.forward)]
    groups = {}
    for seed, grid, n, contrasts, forward in draws:
        recs = _records(seed, grid, n, contrasts, forward)
        _both(recs, args.min_confidence)
        groups[f"seed {seed}"] = recs
    if single:
        _table(groups, ("D", "F", CHOSEN) if CHOSEN else ("D", "F", "C1", "C2", "C3"))
        if CHOSEN:
            _verdict_on_draw(groups[f"seed {args.seed}"], CHOSEN)
        else:
            print("no candidate was chosen on seeds 0-3 (none met the criterion): the rule for a fresh draw does not "
                  "apply and the default stays; the candidates' figures are for information only")
        return 0
    pooled = [r for recs in groups.values() for r in recs]
    if len(groups) > 1:
        groups["pooled"] = pooled
    _table(groups, ("D", "F", "C1", "C2", "C3"))
    print("\nchoice (pooled): wrong <= default + 0.005, wrong at >= 0.9 <= default's, moving called stable <= 0.03;"
          " then the highest right among moving + stable called stable")
    print(f"chosen: {_choose(pooled)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
