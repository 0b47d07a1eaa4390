"""Regional screening against measured truth per stretch of the main divide (run by hand, not a test).

    python tests/benchmarks/bench_regional.py [--n 24] [--seed 0] [--split training|held-out|all]
                                              [--generate-only] [--json FILE]

Builds (or reads from ~/.cache/divides/regional) the regional cases of
divides.model.regional_benchmark one at a time, screens each DEM with the
shipped decision model and prints the targets of issue 14 per case and per
split (docs/validation.md, *Regional screening*). Re-run it after any change
to the decision model: it is the one command behind the figures there.
"""

from __future__ import annotations

import argparse
import json
import time

#: Channel threshold of the validation in cells: the default fallback (about 350 cells here) left six
#: basins above the minimum area and no judged main-divide segment in training case 1.
CHANNEL_CELLS = 50


def screen_case(case, **overrides):
    from divides.assess.screen import screen

    options = dict(theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0,
                   channel_area_m2=CHANNEL_CELLS * case.cell_size ** 2)
    return screen(case.dem(), **{**options, **overrides})


def _fmt(v, spec=".2f"):
    return "–" if v is None else format(v, spec)


def _line(r: dict) -> str:
    top = " ".join(f"#{t['rank']}:{_fmt(t['moving_share'], '.0%')}/{_fmt(t['azimuth_error'], '.0f')}°"
                   for t in r["top"]) or "–"
    return (f"{r['index']:>3} {r['split']:<9} {r['family']:<28} {r['forced_side']} "
            f"moving {r['moving_stretches']:>2} stable {r['stable_stretches']:>2} of {r['stretches']:<2} "
            f"cov {_fmt(r['coverage'], '.0%'):>4} "
            f"seg {r['segments']:>3} main {r['main_segments']:>3} (mov {r['moving_segments']}, stab "
            f"{r['stable_segments']}) top {top} top_ok {r['top_ok']} order {r['order_ok']} "
            f"({r['order_violations']}) alarms {r['alarms']} (main {r['alarms_main']}) max {_fmt(r['max_alarm'])}")


def _logit(p):
    import numpy as np

    p = np.clip(np.asarray(p, dtype=float), 1e-4, 1 - 1e-4)
    return np.log(p / (1 - p))


def fit_instability(rows: list[dict], lead: str = "max") -> dict:
    """Platt scaling (Platt 1999) of the decision's probability of motion to the measured truth per segment.

    Main-divide segments at least 70 % in moving stretches are 1, at least 70 % in stable ones 0
    (the rest, and segments without probabilities, are left out); the input is the logit of the
    leading direction's probability (``lead="max"``) or of P(a) + P(b) (``"sum"``).
    """
    import numpy as np
    from scipy.optimize import minimize

    x, y = [], []
    for r in rows:
        for m in r["main"]:
            p = m["probabilities"]
            if p is None or not (m["in_moving"] or m["in_stable"]):
                continue
            x.append(max(p.get("a", 0.0), p.get("b", 0.0)) if lead == "max" else p.get("a", 0.0) + p.get("b", 0.0))
            y.append(1.0 if m["in_moving"] else 0.0)
    z, y = _logit(x), np.asarray(y)

    def loss(w):
        t = w[0] + w[1] * z
        return float(np.sum(np.logaddexp(0.0, t) - y * t))

    w = minimize(loss, np.array([0.0, 1.0]), method="BFGS").x
    raw = float(np.mean(-(y * np.log(np.clip(x, 1e-4, 1)) + (1 - y) * np.log(np.clip(1 - np.asarray(x), 1e-4, 1)))))
    return {"lead": lead, "alpha": float(w[0]), "beta": float(w[1]), "n": int(y.size), "moving": int(y.sum()),
            "log_loss": loss(w) / max(y.size, 1), "log_loss_uncalibrated": raw}


def instability_log_loss(rows: list[dict]) -> dict:
    """Log loss and AUC (Mann-Whitney) of the shipped instability against the truth per segment."""
    import numpy as np

    x, y = [], []
    for r in rows:
        for m in r["main"]:
            if m["instability"] is None or not (m["in_moving"] or m["in_stable"]):
                continue
            x.append(m["instability"])
            y.append(1.0 if m["in_moving"] else 0.0)
    x, y = np.clip(np.asarray(x), 1e-4, 1 - 1e-4), np.asarray(y)
    loss = float(np.mean(-(y * np.log(x) + (1 - y) * np.log(1 - x)))) if y.size else float("nan")
    pos, neg = x[y == 1], x[y == 0]
    auc = float(np.mean((pos[:, None] > neg[None, :]) + 0.5 * (pos[:, None] == neg[None, :]))) \
        if pos.size and neg.size else float("nan")
    return {"log_loss": loss, "auc": auc}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--n", type=int, default=24)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--split", choices=("training", "held-out", "all"), default="training")
    parser.add_argument("--generate-only", action="store_true")
    parser.add_argument("--json", default=None, help="write the per-case results as JSON lines")
    parser.add_argument("--fit", action="store_true",
                        help="print the instability's Platt scaling fitted on the cases run (use --split training)")
    parser.add_argument("--min-judged-cells", type=float, default=None,
                        help="pool segments shorter than this many cells (default: screen's MIN_JUDGED_CELLS)")
    args = parser.parse_args()
    from divides.model.benchmark import split_of
    from divides.model.regional_benchmark import (
        case_seed,
        load_or_build,
        score,
        stretch_class,
    )

    rows = []
    for i in range(args.n):
        if args.split != "all" and split_of(case_seed(args.seed, i)) != args.split:
            continue  # the split is known from the seed before the case is built
        t0 = time.perf_counter()
        case = load_or_build(args.seed, i)
        built = time.perf_counter() - t0
        if args.generate_only:
            print(f"{i:>3} {case.split:<9} {case.family:<28} built in {built:.0f} s; stretches (cells/τ) "
                  + " ".join(f"{s['rate_m_per_yr'] / case.threshold_m_per_yr:+.1f}"
                             + {"a": "<", "b": ">", "stable": ".", "slow": "~", None: "?"}[
                                 stretch_class(s, case.threshold_m_per_yr)] for s in case.stretches), flush=True)
            continue
        extra = {} if args.min_judged_cells is None else {"min_judged_m": args.min_judged_cells * case.cell_size}
        result = score(case, screen_case(case, **extra))
        rows.append(result)
        print(_line(result), flush=True)
    if args.generate_only:
        return
    if args.json:
        with open(args.json, "w") as fh:
            fh.writelines(json.dumps(r, default=float) + "\n" for r in rows)
    if args.fit:
        fit = fit_instability(rows, "sum")
        print(f"INSTABILITY_SCALING = ({fit['alpha']:.2f}, {fit['beta']:.2f})  # {fit['n']} segments, "
              f"log loss {fit['log_loss']:.3f}")
    for split in ("training", "held-out"):
        part = [r for r in rows if r["split"] == split]
        if not part:
            continue
        judged = [r for r in part if r["top_ok"] is not None]
        ordered = [r for r in part if r["order_ok"] is not None]
        steady = [r for r in part if r["family"].startswith("steady_")]
        print(f"{split}: {len(part)} cases; top ok {sum(bool(r['top_ok']) for r in judged)}/{len(judged)}; "
              f"order ok {sum(bool(r['order_ok']) for r in ordered)}/{len(ordered)}; "
              f"steady without alarm {sum(r['alarm_ok'] for r in steady)}/{len(steady)}; "
              f"coverage >= 90 % {sum(r['coverage_ok'] for r in part)}/{len(part)}")
        fit = fit_instability(part, "sum")
        shipped = instability_log_loss(part)
        print(f"  against the measured truth of {fit['n']} main-divide segments ({fit['moving']} moving), log loss of "
              f"P(a) + P(b) {fit['log_loss_uncalibrated']:.3f}, of the instability {shipped['log_loss']:.3f} "
              f"(AUC {shipped['auc']:.2f}); best Platt scaling on these cases {fit['log_loss']:.3f} "
              f"(alpha {fit['alpha']:+.2f}, beta {fit['beta']:.2f})")


if __name__ == "__main__":
    main()
