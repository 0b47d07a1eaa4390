"""Evidence that might tell still stretches of steady landscapes from moving ones (run by hand, not a test).

    python tests/benchmarks/bench_regional_steadiness.py [--n 24] [--seed 0] [--per-basin] [--forward-model]

Measures, on the TRAINING regional cases only (docs/validation.md, *Regional screening*, *Evidence
tried against the alarms of steady landscapes*), three lines of evidence beside the screening's calibrated
probability of motion from the near-divide contrasts; the rule written beforehand chose 1. and 2. together
on the version-3 cases, and screening reads both by default (divides.assess.segment_motion.INSTABILITY_EVIDENCE):

1. hilltop curvature: the median ∇²z of the hillslope cells (drainage area at most ``HILLSLOPE_CELLS`` cells)
   within ``HILLTOP_RADIUS_CELLS`` cells of a segment on each side; at steady state E = −D ∇²z (Roering, Perron &
   Kirchner 2007), so the more convex side erodes faster. Feature: the relative contrast
   (∇²z_b − ∇²z_a) / (|∇²z_a| + |∇²z_b|), signed toward the side the decision favours;
2. a forward run of the whole DEM under the steady balance: K = 1, D and one U (``--per-basin``: one U
   per outlet basin of the model grid) fitted so that the present surface is the model's steady state,
   U = K A^m S^n − D ∇²z (Perron, Kirchner & Dietrich 2009; as `divides forecast`'s balance), for
   0.3 response times; feature: the shift agrees with the favoured side by ``--agree-cells`` model cells or
   more (default 0.1, as screen's ``forward_agrees``);
3. per outlet basin, the linearity (R²) of channel elevation against χ (Perron & Royden 2013), a steadiness
   test (printed per case).

With ``--forward-model`` it measures instead one variant of the probabilities themselves: each segment judged
again on its own contrasts by the decision model that reads the forward run (``decide(...,
forward_in_decision=True)``), with the segment's shift in the steady-balance run (2.), and the instability a
Platt scaling of logit(P(a) + P(b)) per kind of divide refitted on these probabilities.

For each feature set it fits instability = 1 / (1 + exp(−(α + β logit p + γ·features))) per kind of
divide, prints the leave-one-case-out log loss and AUC, and the issue's targets with the in-sample fit.
The adoption rule was written before any of it was measured (docs/validation.md).
"""

from __future__ import annotations

import argparse
import dataclasses
import math

import numpy as np
from bench_regional import screen_case
from scipy.optimize import minimize

from divides.assess.contrasts import Contrast
from divides.assess.hilltops import hilltop_contrast
from divides.assess.screen import _outlet_basins, motion_azimuth
from divides.assess.verdict import FORWARD_NOISE_CELLS, decide
from divides.model.benchmark import split_of
from divides.model.forward_run import (
    laplacian,
)
from divides.model.landscape_shift import LandscapeShift, landscape_shift
from divides.model.regional_benchmark import (
    case_seed,
    lateral_truth,
    load_or_build,
    score,
)
from divides.profiles.chi import integrate_chi
from divides.terrain.basins import basin_labels

def steady_run(dem, *, theta: float, n: float, closed_edges, channel_area_m2: float, per_basin: bool) -> LandscapeShift:
    """Screen's landscape run under the steady balance (K = 1, 0.3 response times): U and D fitted so that the
    present surface is the model's steady state, one U for the whole DEM or one per outlet basin (screening
    reads both)."""
    return landscape_shift(dem, theta=theta, n=n, closed_edges=closed_edges, channel_area_m2=channel_area_m2,
                           balance="steady-basins" if per_basin else "steady")


def contrasts_of(rows: list[dict]) -> list[Contrast]:
    """The Contrast objects back from a screened segment's ``contrasts`` (their JSON form: None for NaN)."""
    def num(v):
        return float("nan") if v is None else float(v)

    return [Contrast(**{**c, "a": num(c["a"]), "b": num(c["b"]), "difference": num(c["difference"]),
                        "ci95": (num(c["ci95"][0]), num(c["ci95"][1])), "consistency": num(c["consistency"]),
                        "n_effective": num(c["n_effective"])}) for c in rows]


def forward_judged(seg: dict, shift: float, dem, min_confidence: float) -> dict:
    """The segment judged again by the decision model that reads the forward run, with ``shift`` (model cells,
    positive into b, as :func:`divides.assess.verdict.decide` expects): the keys of the segment it changes.
    Without a finite shift the near-divide model decides, as in screening."""
    finite = bool(np.isfinite(shift))
    v = decide(contrasts_of(seg["contrasts"]), min_confidence=min_confidence,
               forward_shift=float(shift) if finite else None, forward_in_decision=finite)
    a, b = seg["basins"]
    victim = {"a": a, "b": b}.get(v.moves_toward)
    return {"probabilities": None if v.reason == "insufficient data" else v.probabilities,
            "confidence": v.confidence, "verdict": v.moves_toward, "moves_toward_basin": victim,
            "motion_azimuth_deg": motion_azimuth(seg["line"], dem, v.moves_toward, seg["judged_lines"]) if victim is not None else None}


def chi_linearity(screening, theta: float) -> list[float]:
    """R² of channel elevation against χ (from each network's mouth) per outlet basin with >= 10 channel cells."""
    ch = screening.channels
    chi = integrate_chi(ch.down, ch.step, ch.area, theta=theta, a0=1.0)
    outlet = basin_labels(screening.flow, min_area_m2=screening.parameters["min_basin_area_m2"],
                          level="outlets").ravel()[ch.cells]
    out = []
    for b in np.unique(outlet[outlet > 0]):
        x, y = chi[outlet == b], ch.elevation[outlet == b]
        if x.size >= 10 and np.var(y) > 0:
            res = y - np.polyval(np.polyfit(x, y, 1), x)
            out.append(1.0 - float(np.var(res) / np.var(y)))
    return out


def _logit(p):
    p = np.clip(np.asarray(p, dtype=float), 1e-4, 1 - 1e-4)
    return np.log(p / (1 - p))


def _fit(x, y):
    x = np.column_stack([np.ones(len(y)), x])
    w0 = np.zeros(x.shape[1])
    w0[1] = 1.0
    return minimize(lambda w: float(np.sum(np.logaddexp(0, x @ w) - y * (x @ w))), w0, method="BFGS").x


def _prob(w, x):
    return 1.0 / (1.0 + np.exp(-(np.column_stack([np.ones(x.shape[0]), x]) @ w)))


def _auc(x, y):
    pos, neg = x[y == 1], x[y == 0]
    return float(np.mean((pos[:, None] > neg[None, :]) + 0.5 * (pos[:, None] == neg[None, :])))


def summarise_forward(cases: list[dict]) -> None:
    """Print, per kind of divide and truth, how often each model calls a segment stable or gives a direction."""
    for kind in ("main", "lateral"):
        for label, y in (("moving", 1.0), ("not moving", 0.0)):
            rows = [r for c in cases for r in c["rows"] if r["y"] == y and r["near"]["divide_kind"] == kind]
            if not rows:
                continue
            counts = []
            for verdicts in ([r["near"]["verdict"] for r in rows], [r["fwd"]["verdict"] for r in rows]):
                counts.append(f"{sum(v == 'stable' for v in verdicts)} stable, "
                              f"{sum(v in ('a', 'b') for v in verdicts)} with a direction")
            print(f"{kind} segments {label} ({len(rows)}): near-divide model {counts[0]}; "
                  f"forward-reading model {counts[1]}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--n", type=int, default=24)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--per-basin", action="store_true", help="the steady run with one U per outlet basin")
    parser.add_argument("--agree-cells", type=float, default=FORWARD_NOISE_CELLS,
                        help="the run agrees when it moves the segment this many model cells toward the favoured side")
    parser.add_argument("--forward-model", action="store_true",
                        help="each segment judged by the decision model that reads the steady run's shift")
    args = parser.parse_args()
    cases = []
    for i in range(args.n):
        if split_of(case_seed(args.seed, i)) != "training":
            continue  # held-out cases are never read here
        case = load_or_build(args.seed, i)
        scr = screen_case(case, forward_run=False)  # each line of evidence is measured here
        lateral = lateral_truth(case)
        truth = score(case, scr, lateral=lateral)
        labelled = {m["rank"]: m for m in truth["main"] + truth.get("lateral", [])}
        dem = case.dem()
        lap = laplacian(dem)
        area_cells = np.asarray(scr.flow.area, dtype=float).reshape(dem.shape) / case.cell_size ** 2
        p = scr.parameters
        run = steady_run(dem, theta=float(p["theta"]), n=float(p["n"]), closed_edges=case.closed_edges,
                         channel_area_m2=p["channel_area_used_m2"], per_basin=args.per_basin)
        outlet_of = _outlet_basins(scr.flow, scr.labels, p["min_basin_area_m2"], p["level"])
        sides = outlet_of[run.on_model_grid(scr.labels)]
        rows = []
        same = 0
        for s in scr.segments:
            a, b = s["basins"]
            probs = s["probabilities"]
            favoured = 0.0 if probs is None else float(np.sign(probs.get("b", 0.0) - probs.get("a", 0.0)))
            shift = run.piece_shift(s["line"], sides, int(outlet_of[a]), int(outlet_of[b]))
            m = labelled.get(s["rank"])
            rows.append({"seg": s, "y": None if m is None or not (m["in_moving"] or m["in_stable"]) else float(m["in_moving"]),
                         "curv": favoured * hilltop_contrast(s["line"], scr.labels, a, b, lap, area_cells),
                         "run": 0.0 if probs is None or not np.isfinite(shift) or favoured == 0.0
                         else float(favoured * shift >= args.agree_cells),
                         "shift": shift})
            if args.forward_model:
                # the near-divide model on the rebuilt contrasts must give screening's probabilities back
                near = forward_judged(s, math.nan, dem, float(p["min_confidence"]))
                same += near["probabilities"] == probs and near["confidence"] == s["confidence"]
                rows[-1]["fwd"] = forward_judged(s, shift, dem, float(p["min_confidence"]))
        if args.forward_model:
            print(f"    rebuilt contrasts give screening's decision back on {same} of {len(rows)} segments")
        r2 = chi_linearity(scr, float(p["theta"]))
        print(f"{i:>3} {case.family:<28} χ-elevation R² per outlet basin: median {np.median(r2):.4f}, "
              f"lowest {np.min(r2):.4f}", flush=True)
        cases.append({"case": case, "screening": scr, "lateral": lateral, "rows": rows})
    steady = [c for c in cases if c["case"].steady]
    shifts = [abs(r["shift"]) for c in steady for r in c["rows"] if np.isfinite(r["shift"])]
    print(f"steady controls: median |shift| of the steady run {np.median(shifts):.2f} model cells")
    for c in cases:
        for r in c["rows"]:
            r["near"] = r["seg"]
    if args.forward_model:
        summarise_forward(cases)
        variants = (("none (near-divide model, as shipped)", (), False), ("forward-reading model", (), True))
    else:
        variants = (("none", (), False), ("hilltop curvature", ("curv",), False), ("steady run", ("run",), False),
                    ("both", ("curv", "run"), False))
    for name, keys, forward_model in variants:
        for c in cases:  # each segment as the near-divide or the forward-reading model judged it
            for r in c["rows"]:
                r["seg"] = r["near"] | r["fwd"] if forward_model else r["near"]
        weights, report = {}, []
        for kind in ("main", "lateral"):
            data = [(c["case"].index, r) for c in cases for r in c["rows"]
                    if r["y"] is not None and r["seg"]["probabilities"] is not None and r["seg"]["divide_kind"] == kind]
            group = np.array([g for g, _ in data])
            y = np.array([r["y"] for _, r in data])
            q = [r["seg"]["probabilities"] for _, r in data]
            x = np.column_stack([_logit([v.get("a", 0) + v.get("b", 0) for v in q])]
                                + [np.array([r[k] for _, r in data]) for k in keys])
            pred = np.zeros(y.size)
            for g in np.unique(group):  # leave one case out
                pred[group == g] = _prob(_fit(x[group != g], y[group != g]), x[group == g])
            pc = np.clip(pred, 1e-4, 1 - 1e-4)
            weights[kind] = _fit(x, y)
            report.append(f"{kind}: {y.size} segments, leave-one-case-out log loss "
                          f"{float(np.mean(-(y * np.log(pc) + (1 - y) * np.log(1 - pc)))):.3f}, AUC {_auc(pred, y):.3f}, "
                          f"coefficients {np.round(weights[kind], 2).tolist()}")
        top = order = no_alarm = alarms_main = alarms_lateral = n_top = n_order = 0
        by_truth = {1.0: 0, 0.0: 0, None: 0}  # alarms of steady landscapes by their segment's truth
        for c in cases:
            segs = []
            for r in c["rows"]:
                s = dict(r["seg"])
                if s["probabilities"] is not None:
                    v = s["probabilities"]
                    x = np.array([[float(_logit(v.get("a", 0) + v.get("b", 0)))] + [r[k] for k in keys]])
                    s["instability"] = float(_prob(weights[s["divide_kind"]], x)[0])
                if c["case"].steady and s["instability"] is not None and s["instability"] >= 0.5 \
                        and s["confidence"] is not None and s["confidence"] >= 0.5:
                    by_truth[r["y"]] += 1
                segs.append(s)
            segs.sort(key=lambda s: (s["instability"] is None, -(s["instability"] or 0.0), -s["length_m"]))
            segs = [s | {"rank": k} for k, s in enumerate(segs, start=1)]
            res = score(c["case"], dataclasses.replace(c["screening"], segments=segs), lateral=c["lateral"])
            n_top += res["top_ok"] is not None
            top += bool(res["top_ok"])
            n_order += res["order_ok"] is not None
            order += bool(res["order_ok"])
            if c["case"].steady:
                no_alarm += res["alarm_ok"]
                alarms_main += res["alarms_by_kind"]["main"]
                alarms_lateral += res["alarms_by_kind"]["lateral"]
        print(f"{name}: " + "; ".join(report))
        print(f"  top {top}/{n_top}, order {order}/{n_order}, steady without alarm {no_alarm}/{len(steady)}, "
              f"alarms in steady landscapes main / lateral {alarms_main} / {alarms_lateral} (in moving / not moving / "
              f"slow or unmeasured stretches or pairs {by_truth[1.0]} / {by_truth[0.0]} / {by_truth[None]})")


if __name__ == "__main__":
    main()
