"""Rounds 42-60: candidate calibrations of the probability of motion, fitted on screened regional cases and scored
leaving one case out (run by hand, not a test).

    python tests/benchmarks/fit_motion_probability.py --condition E0 FILE.jsonl ... --condition E1 ... \
        [--candidates P2 P2e] [--told-error E0=1 E1=1 E5=5] [--probability P2e]
        [--fit-all | --rankings NAME ... | --alarms | --lateral-veto | --lateral-cap | --instability-cap |
         --near-divide-scaling]

Reads the per-case JSON lines of ``bench_regional.py --json`` (training cases only), one group of files per
condition of DEM error, and for each kind of divide (main, lateral) and each candidate of docs/validation.md
(*Regional screening*, rounds 42 and 46; round 42's P0-P2 by default) prints, per condition, the log loss, AUC and
expected calibration error of the probability of every segment in a moving or still stretch, each case scored by
coefficients fitted without it (its conditions left out together), beside those of the instability the shipped
default gives; then, by round 42's rule, the candidate that ships and its reliability. ``--told-error`` gives the
DEM error each condition's screenings were told (round 46's P2e reads it; 1 m, the screening's default, when not
given). ``--fit-all`` prints each candidate's coefficients fitted on every case (what would ship).
``--rankings`` (rounds 43, 45, 48, 50–56 and 57) instead scores orders of the segments of ``rescore_regional.RANKINGS``,
``--alarms`` (round 44) the steady landscapes' alarms read from the probability, each case's probability fitted
without it;
``--near-divide-scaling`` refits round 60's Platt scaling of the near-divide decision on the first condition's cases;
``--lateral-veto`` scores round 47's candidates, ``--lateral-cap`` round 49's and ``--instability-cap`` round 57's
(the instability reported as the smaller of the score and the probability, ``--probability``'s, each case's fitted
without it and capped as shipped on lateral divides whose hilltops contradict them). The instability and the
neighbours' scores are recomputed with the shipped model (``rescore_regional.py``), and the script checks that the
package computes the shipped candidate's features as it does.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import re
from collections.abc import Callable

import numpy as np
from bench_regional import fit_instability, probability_scores  # this folder (scripts run from here)
from rescore_regional import PRIOR_SD, RANKINGS, _size, instability, targets
from scipy.optimize import minimize

from divides.assess.screen import INSTABILITY_EVIDENCE, beside_scored, evidence_features
from divides.assess.segment_motion import (
    INSTABILITY_SCALING,
    LATERAL_HILLS_AGAINST_MAX,
    bounded_instability,
    motion_features,
)
from divides.model.regional_benchmark import raises_alarm

KINDS = ("main", "lateral")
CLIP = 1e-12
RUN_CAP = 5.0


def _z(m: dict) -> float:
    """The logit of the instability, clipped to [CLIP, 1 - CLIP]."""
    p = min(max(m["_i"], CLIP), 1.0 - CLIP)
    return math.log(p / (1.0 - p))


def _runs(m: dict) -> list[float]:
    """The larger |shift| of the two runs capped at RUN_CAP (0 unmeasured) and 1 when neither measured it."""
    s = _size(m)
    return [0.0 if s is None else min(s, RUN_CAP), float(s is None)]


def _beside(m: dict, kind: str) -> list[float]:
    return [float(beside_scored(m))] if kind == "main" else []


def _p2(m: dict, kind: str) -> list[float]:
    logit, hill, agrees = evidence_features(m["probabilities"], m, kind)
    return [logit, hill, agrees, *_runs(m), *_beside(m, kind)]


#: The DEM error a screening is told is read up to this many metres by round 46's P2e (the most the training cases
#: were told).
TOLD_CAP_M = 5.0

#: name -> features of a segment of a kind (the intercept is added by the fit); P0-P2 are round 42's, P2e round 46's
CANDIDATES: dict[str, Callable[[dict, str], list[float]]] = {
    "P0": lambda m, kind: [_z(m)],
    "P1": lambda m, kind: [_z(m), *_runs(m), *_beside(m, kind)],
    "P2": _p2,
    "P2e": lambda m, kind: [*_p2(m, kind), min(m["_told_m"], TOLD_CAP_M)],
}


def shipped(m: dict, kind: str) -> list[float]:
    """The features as the package computes them (divides.assess.segment_motion, round 46's P2e), for the check that
    it reproduces the candidate that shipped (printed by :func:`main`)."""
    return list(motion_features(kind, m["probabilities"], m, beside=bool(_beside(m, kind) == [1.0]),
                                dem_error_m=m["_told_m"]))


def fit(x: np.ndarray, y: np.ndarray, start: np.ndarray | None = None) -> np.ndarray:
    """Maximum-likelihood logistic coefficients (intercept first), Gaussian prior of sd PRIOR_SD on the others."""
    design = np.column_stack([np.ones(y.size), x])

    def loss(w):
        t = design @ w
        return float(np.sum(np.logaddexp(0.0, t) - y * t) + np.sum(w[1:] ** 2) / (2 * PRIOR_SD ** 2))

    def grad(w):
        t = design @ w
        g = design.T @ (1.0 / (1.0 + np.exp(-t)) - y)
        g[1:] += w[1:] / PRIOR_SD ** 2
        return g

    w0 = np.zeros(design.shape[1]) if start is None else start
    return minimize(loss, w0, jac=grad, method="BFGS").x


def predict(w: np.ndarray, x: np.ndarray) -> np.ndarray:
    t = w[0] + x @ w[1:]
    return 1.0 / (1.0 + np.exp(-np.clip(t, -700, 700)))


def _cases(names: list[str]) -> list[dict]:
    """The cases of bench_regional.py --json outputs, each keyed (``_case``) by its master seed and index; records
    written before they kept the master seed take it from their path (``seedN.jsonl`` or a folder ``JN``)."""
    rows = []
    for name in names:
        found = re.search(r"seed(\d+)", os.path.basename(name)) or re.search(r"J(\d+)", os.path.dirname(name))
        with open(name) as fh:
            for line in fh:
                row = json.loads(line)
                seed = row.get("master_seed", int(found.group(1)) if found else name)
                rows.append({**row, "_case": (seed, row["index"])})
    return rows


def prepared(groups: dict[str, list[str]], told: dict[str, float] | None = None) -> dict[str, list[dict]]:
    """The cases of each condition, every segment with the shipped instability (``_i``) and the DEM error its
    screening was told (``_told_m``, from ``told`` by condition; the default 1 m when not given), and every main
    segment with the neighbours' scores recomputed under the shipped model."""
    out = {}
    for cond, files in groups.items():
        out[cond] = _cases(files)
        for case in out[cond]:
            for m in case["main"] + case.get("lateral", []) + case["others"]:
                m["_i"] = instability(m, None, "shipped now")
                m["_told_m"] = (told or {}).get(cond, 1.0)
            targets(case, "shipped")  # sets each main segment's neighbour_instability under the shipped model
    return out


def segments(cases: dict[str, list[dict]]) -> list[dict]:
    """Every main and lateral segment in a moving or still stretch of the :func:`prepared` cases: its case,
    condition, kind, outcome and record."""
    out = []
    for cond, rows in cases.items():
        for case in rows:
            for kind, segs in (("main", case["main"]), ("lateral", case.get("lateral", []))):
                for m in segs:
                    if m["_i"] is None or not (m["in_moving"] or m["in_stable"]):
                        continue
                    out.append({"case": case["_case"], "cond": cond, "kind": kind, "y": float(m["in_moving"]),
                                "m": m})
    return out


def attach_loco(cases: dict[str, list[dict]], rows: list[dict], features: Callable[[dict, str], list[float]],
                kinds: tuple[str, ...] = ("main",)) -> None:
    """Rounds 43 and 44: every segment of a known score and of one of ``kinds`` (main and lateral segments, and the
    others) gets ``_p``, its probability of motion from ``features``' coefficients fitted on the labelled segments
    of its kind in the other cases (all conditions)."""
    for kind in kinds:
        sel = [r for r in rows if r["kind"] == kind]
        x = np.asarray([features(r["m"], kind) for r in sel], dtype=float)
        y = np.asarray([r["y"] for r in sel])
        ids = np.asarray([hash(r["case"]) for r in sel])
        w_all = fit(x, y)
        weights = {c: fit(x[ids != c], y[ids != c], w_all) for c in np.unique(ids)}
        for part in cases.values():
            for case in part:
                w = weights.get(hash(case["_case"]), w_all)  # a case without a labelled segment: fitted on all
                for m in case["main"] + case.get("lateral", []) + case["others"]:
                    if (m.get("kind") or m.get("divide_kind")) == kind:
                        m["_p"] = None if m["_i"] is None else float(predict(w, np.asarray([features(m, kind)]))[0])


def loco(rows: list[dict], features: Callable[[dict, str], list[float]], kind: str) -> np.ndarray:
    """Each segment's probability from coefficients fitted without its case."""
    sel = [r for r in rows if r["kind"] == kind]
    x = np.asarray([features(r["m"], kind) for r in sel], dtype=float)
    y = np.asarray([r["y"] for r in sel])
    cases = np.asarray([hash(r["case"]) for r in sel])
    w_all = fit(x, y)
    p = np.empty(y.size)
    for c in np.unique(cases):
        out = cases == c
        p[out] = predict(fit(x[~out], y[~out], w_all), x[out])
    return p


def _lateral_terms(m: dict) -> tuple[float, float]:
    """Round 47: a lateral segment's shipped logit (screen.INSTABILITY_EVIDENCE) and min(h, 0), h its hilltop
    contrast toward the favoured side."""
    alpha, beta, g_hill, g_run = INSTABILITY_EVIDENCE["lateral"]
    logit, hill, agrees = evidence_features(m["probabilities"], m, "lateral")
    return alpha + beta * logit + g_hill * hill + g_run * agrees, min(hill, 0.0)


def fit_veto(o: np.ndarray, x: np.ndarray, y: np.ndarray) -> float:
    """Round 47's g >= 0: maximum likelihood of y ~ logistic(o + g x), Gaussian prior of sd PRIOR_SD on g."""
    def loss(g):
        t = o + g[0] * x
        return float(np.sum(np.logaddexp(0.0, t) - y * t) + g[0] ** 2 / (2 * PRIOR_SD ** 2))
    return max(0.0, float(minimize(loss, np.zeros(1), method="Nelder-Mead").x[0]))


def lateral_veto(cases: dict[str, list[dict]], rows: list[dict]) -> None:
    """Round 47: print, per condition, the steady landscapes without an alarm and the lateral log loss of the shipped
    score, V1 (its logit + g min(h, 0), g fitted without the case) and V2 (at most 0.49 where h < 0)."""
    sel = [r for r in rows if r["kind"] == "lateral"]
    terms = np.asarray([_lateral_terms(r["m"]) for r in sel])
    y = np.asarray([r["y"] for r in sel])
    ids = np.asarray([hash(r["case"]) for r in sel])
    g_all = fit_veto(terms[:, 0], terms[:, 1], y)
    g_out = {c: fit_veto(terms[ids != c, 0], terms[ids != c, 1], y[ids != c]) for c in np.unique(ids)}
    print(f"V1: g fitted on every case {g_all:.3f}; without one case "
          f"{min(g_out.values()):.3f}-{max(g_out.values()):.3f}")

    def score(m: dict, case: dict, name: str) -> float | None:
        i, kind = m["_i"], m.get("kind") or m.get("divide_kind")
        if i is None or kind != "lateral" or name == "shipped":
            return i
        t, veto = _lateral_terms(m)
        if name == "V1":
            t += g_out.get(hash(case["_case"]), g_all) * veto
            return float(1.0 / (1.0 + math.exp(-t))) if t > -700 else 0.0
        return min(i, 0.49) if veto < 0 else i

    print("| lateral score | " + " | ".join(f"{c}: steady landscapes without an alarm, lateral log loss"
                                            for c in cases) + " |")
    print("| --- " * (1 + len(cases)) + "|")
    for name in ("shipped", "V1", "V2"):
        cells = []
        for cond, part in cases.items():
            steady = [c for c in part if c["family"].startswith("steady_")]
            ok = sum(not any(raises_alarm({**m, "instability": score(m, c, name)}) for m in c["main"] + c["others"])
                     for c in steady)
            lat = [(score(m, c, name), float(m["in_moving"])) for c in part for m in c.get("lateral", [])
                   if m["_i"] is not None and (m["in_moving"] or m["in_stable"])]
            loss = probability_scores([v for v, _ in lat], [t for _, t in lat])["log_loss"]
            cells.append(f"{ok}/{len(steady)}, {loss:.3f}")
        print(f"| {name} | " + " | ".join(cells) + " |")


def lateral_cap(rows: list[dict], groups: dict[str, list[str]]) -> None:
    """Round 49: print, per condition, the lateral log loss and calibration error of P2e (each case's fitted without
    it) and of the same capped at LATERAL_HILLS_AGAINST_MAX where the hilltops contradict the direction (h < 0)."""
    sel = [r for r in rows if r["kind"] == "lateral"]
    p = loco(rows, CANDIDATES["P2e"], "lateral")
    y = np.asarray([r["y"] for r in sel])
    cond = np.asarray([r["cond"] for r in sel])
    against = np.asarray([evidence_features(r["m"]["probabilities"], r["m"], "lateral")[1] < 0.0 for r in sel])
    capped = np.where(against, np.minimum(p, LATERAL_HILLS_AGAINST_MAX), p)
    print("| lateral probability | " + " | ".join(f"{c} log loss, ECE" for c in groups) + " |")
    print("| --- " * (1 + len(groups)) + "|")
    for name, q in (("P2e", p), ("C1", capped)):
        cells = [probability_scores(q[cond == c], y[cond == c]) for c in groups]
        print(f"| {name} | " + " | ".join(f"{sc['log_loss']:.4f}, {sc['ece']:.4f}" for sc in cells) + " |")
    changed = against & (p > LATERAL_HILLS_AGAINST_MAX)
    print("lowered:", {c: int(np.sum(changed & (cond == c))) for c in groups},
          "of which moving:", {c: int(np.sum(changed & (cond == c) & (y == 1))) for c in groups})


def instability_cap(cases: dict[str, list[dict]], rows: list[dict],
                    features: Callable[[dict, str], list[float]]) -> None:
    """Round 57: print, per condition, the steady landscapes without an alarm (segments alarmed) and the main segments
    in moving stretches that raise the alarm, with the instability read from the score and from the smaller of the
    score and the probability of motion (each case's fitted without it; round 49's cap on lateral divides)."""
    attach_loco(cases, rows, features, KINDS)
    for part in cases.values():
        for case in part:
            for m in case["main"] + case.get("lateral", []) + case["others"]:
                kind = m.get("kind") or m.get("divide_kind")
                p = m.get("_p")
                if p is not None and kind == "lateral" and evidence_features(m["probabilities"], m, kind)[1] < 0:
                    p = min(p, LATERAL_HILLS_AGAINST_MAX)
                m["_cap"] = bounded_instability(m["_i"], p)
    print("| instability | " + " | ".join(f"{c}: steady landscapes without an alarm (segments alarmed); main segments "
                                          "in moving stretches alarmed" for c in cases) + " |")
    print("| --- " * (1 + len(cases)) + "|")
    for key, name in (("_i", "the score (shipped)"), ("_cap", "C: the smaller of the score and the probability")):
        cells = []
        for part in cases.values():
            steady = [case for case in part if case["family"].startswith("steady_")]
            alarmed = [sum(raises_alarm({**m, "instability": m[key]}) for m in case["main"] + case["others"])
                       for case in steady]
            hits = sum(raises_alarm({**m, "instability": m[key]}) for case in part for m in case["main"]
                       if m["in_moving"])
            cells.append(f"{sum(a == 0 for a in alarmed)}/{len(steady)} ({sum(alarmed)}); {hits}")
        print(f"| {name} | " + " | ".join(cells) + " |")


def near_divide_scaling(groups: dict[str, list[str]], fit_on: str = "E0") -> None:
    """Round 60: the Platt scaling of P(a) + P(b) per kind (``INSTABILITY_SCALING``, read without the landscape
    evidence) refitted on the ``fit_on`` condition's cases, each case scored under every condition by the scaling
    fitted without it, beside the shipped one: log loss and calibration error per kind, and the steady landscapes
    a ``--no-forward-run`` screening leaves without an alarm."""
    cases = {cond: _cases(files) for cond, files in groups.items()}
    fits = {k: fit_instability(cases[fit_on], k) for k in KINDS}
    print("fitted on every case: " + "; ".join(f"{k} ({f['alpha']:.2f}, {f['beta']:.2f}), {f['n']} segments, "
                                               f"{f['moving']} moving" for k, f in fits.items()))
    left_out = {}
    for case in cases[fit_on]:
        rest = [c for c in cases[fit_on] if c["_case"] != case["_case"]]
        left_out[case["_case"]] = {k: (lambda f: (f["alpha"], f["beta"]))(fit_instability(rest, k)) for k in KINDS}

    def scaled(p: dict, kind: str, name: str, case: dict) -> float:
        """P(a) + P(b) of a segment of ``case`` Platt-scaled by the shipped or the left-out fit (``name``)."""
        alpha, beta = INSTABILITY_SCALING[kind] if name == "shipped" else left_out[case["_case"]][kind]
        return 1.0 / (1.0 + math.exp(-min(max(alpha + beta * evidence_features(p, {}, kind)[0], -700.0), 700.0)))

    total = {"shipped": 0.0, "refitted": 0.0}
    print("| condition | kind | segments (moving) | shipped log loss (ECE) | refitted (ECE) |\n" + "| --- " * 5 + "|")
    for cond, rows in cases.items():
        for kind in KINDS:
            cells = []
            for name in total:
                p, y = [], []
                for case in rows:
                    for m in case["main"] + case.get("lateral", []):
                        if m["probabilities"] is not None and (m["in_moving"] or m["in_stable"]) and m["kind"] == kind:
                            p.append(scaled(m["probabilities"], kind, name, case))
                            y.append(float(m["in_moving"]))
                sc = probability_scores(p, y)
                total[name] += sc["log_loss"]
                cells.append(f"{sc['log_loss']:.3f} ({sc['ece']:.3f})")
            print(f"| {cond} | {kind} | {sc['n']} ({sc['moving']}) | " + " | ".join(cells) + " |")
    print("summed log loss: " + ", ".join(f"{k} {v:.3f}" for k, v in total.items()))
    for cond, rows in cases.items():
        steady = [c for c in rows if c["family"].startswith("steady_")]
        for name in total:
            quiet = sum(not any(
                m["probabilities"] is not None and raises_alarm(
                    {**m, "instability": scaled(m["probabilities"], m.get("divide_kind") or m["kind"], name, case)})
                for m in case["main"] + case["others"]) for case in steady)
            print(f"{cond}, {name}: steady landscapes without an alarm (--no-forward-run) {quiet}/{len(steady)}")


def reliability(p: np.ndarray, y: np.ndarray) -> list[tuple[str, int, float, float]]:
    """Ten equal bins: label, count, mean probability, share moving."""
    bins = np.minimum((p * 10).astype(int), 9)
    return [(f"{b / 10:.1f}-{(b + 1) / 10:.1f}", int(np.sum(bins == b)), float(p[bins == b].mean()),
             float(y[bins == b].mean())) for b in range(10) if np.any(bins == b)]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--condition", nargs="+", action="append", required=True, metavar=("NAME", "FILE"),
                        help="a condition's name, then its bench_regional.py --json outputs")
    parser.add_argument("--fit-all", action="store_true", help="print the coefficients fitted on every case")
    parser.add_argument("--candidates", nargs="*", default=["P0", "P1", "P2"], choices=list(CANDIDATES),
                        help="the calibrations to score (round 42's by default; round 46: P2 P2e)")
    parser.add_argument("--told-error", nargs="*", default=[], metavar="COND=M",
                        help="the DEM error each condition's screenings were told, in m (default 1, the screening's)")
    parser.add_argument("--rankings", nargs="*", default=[], choices=list(RANKINGS),
                        help="round 43: score these orders of the segments, each case's probability of motion (P2) "
                             "fitted without it, and stop")
    parser.add_argument("--probability", default="P2", choices=list(CANDIDATES),
                        help="the probability of motion --rankings reads (rounds 43 and 45: P2; round 48: P2e)")
    parser.add_argument("--lateral-veto", action="store_true",
                        help="round 47: the lateral score with hilltops that contradict its direction, and stop")
    parser.add_argument("--lateral-cap", action="store_true",
                        help="round 49: the lateral probability of motion with and without round 47's cap, and stop")
    parser.add_argument("--instability-cap", action="store_true",
                        help="round 57: alarms with the instability capped at the probability of motion")
    parser.add_argument("--near-divide-scaling", action="store_true",
                        help="round 60: INSTABILITY_SCALING refitted on the first condition's cases, and stop")
    parser.add_argument("--alarms", action="store_true",
                        help="round 44: the steady landscapes' alarms read from the score and from the probability "
                             "of motion (both kinds, each case's fitted without it), and stop")
    args = parser.parse_args()
    groups = {g[0]: g[1:] for g in args.condition}
    told = {k: float(v) for k, v in (t.split("=") for t in args.told_error)}
    if args.near_divide_scaling:
        near_divide_scaling(groups, next(iter(groups)))
        return
    cases = prepared(groups, told)
    rows = segments(cases)
    if args.rankings:
        attach_loco(cases, rows, CANDIDATES[args.probability])
        print("| ranking | " + " | ".join(f"{c} targets (top, order, no alarm)" for c in groups) + " | sum |")
        print("| --- " * (2 + len(groups)) + "|")
        for name in args.rankings:
            cells, total = [], 0
            for cond in groups:
                t = [targets(case, name) for case in cases[cond]]
                n = {k: sum(bool(x[k]) for x in t if x[k] is not None) for k in ("top", "order", "alarm_ok")}
                cells.append(f"{sum(n.values())} ({n['top']}, {n['order']}, {n['alarm_ok']})")
                total += sum(n.values())
            print(f"| {name} | " + " | ".join(cells) + f" | {total} |")
        return
    if args.lateral_veto:
        lateral_veto(cases, rows)
        return
    if args.lateral_cap:
        lateral_cap(rows, groups)
        return
    if args.instability_cap:
        instability_cap(cases, rows, CANDIDATES[args.probability])
        return
    if args.alarms:
        attach_loco(cases, rows, CANDIDATES["P2"], KINDS)
        print("| alarms read from | " + " | ".join(f"{c} steady landscapes without an alarm (segments alarmed)"
                                                for c in groups) + " |")
        print("| --- " * (1 + len(groups)) + "|")
        for key in ("_i", "_p"):
            cells = []
            for cond in groups:
                steady = [case for case in cases[cond] if case["family"].startswith("steady_")]
                alarmed = [sum(raises_alarm({**m, "instability": m[key]}) for m in case["main"] + case["others"])
                           for case in steady]
                cells.append(f"{sum(a == 0 for a in alarmed)}/{len(steady)} ({sum(alarmed)})")
            print(f"| {'the score' if key == '_i' else 'the probability of motion'} | " + " | ".join(cells) + " |")
        return
    same = all(shipped(r["m"], r["kind"]) == CANDIDATES["P2e"](r["m"], r["kind"]) for r in rows)
    print(f"divides.assess.segment_motion.motion_features equals P2e's features on all {len(rows)} segments: {same}")
    names = list(args.candidates)
    table: dict[tuple[str, str, str], dict] = {}
    for kind in KINDS:
        sel = [r for r in rows if r["kind"] == kind]
        y = np.asarray([r["y"] for r in sel])
        conds = np.asarray([r["cond"] for r in sel])
        given = np.asarray([r["m"]["_i"] for r in sel])
        for cond in groups:
            table[(kind, "instability", cond)] = probability_scores(given[conds == cond], y[conds == cond])
        for name in names:
            p = loco(rows, CANDIDATES[name], kind)
            for cond in groups:
                table[(kind, name, cond)] = probability_scores(p[conds == cond], y[conds == cond])
            if args.fit_all:
                x = np.asarray([CANDIDATES[name](r["m"], kind) for r in sel], dtype=float)
                print(f"{kind} {name} fitted on every case: {np.round(fit(x, y), 3).tolist()}")
        print(f"\n{kind}: {len(sel)} segments ({int(y.sum())} moving), leave one case out")
        print("| probability | " + " | ".join(f"{c} log loss | {c} ECE | {c} AUC" for c in groups) + " |")
        print("| --- " * (1 + 3 * len(groups)) + "|")
        for name in ["instability", *names]:
            cells = [f"{table[(kind, name, c)]['log_loss']:.3f} | {table[(kind, name, c)]['ece']:.3f} | "
                     f"{table[(kind, name, c)]['auc']:.3f}" for c in groups]
            print(f"| {name} | " + " | ".join(cells) + " |")
    qualified = [n for n in names if all(
        table[("main", n, c)]["log_loss"] < table[("main", "instability", c)]["log_loss"]
        and table[("main", n, c)]["ece"] < table[("main", "instability", c)]["ece"]
        and table[("lateral", n, c)]["log_loss"] <= table[("lateral", "instability", c)]["log_loss"] + 0.005
        for c in groups)]
    if not qualified:
        print("\nnone qualifies")
        return
    total = {n: sum(table[("main", n, c)]["log_loss"] for c in groups) for n in qualified}
    best = min(total.values())
    # within 0.005 of the best, the one with fewer coefficients (the candidates are listed by size)
    ship = next(n for n in qualified if total[n] <= best + 0.005)
    print(f"\nqualify: {qualified}; summed main log loss {({n: round(v, 4) for n, v in total.items()})}; ships: {ship}")
    for kind in KINDS:
        sel = [r for r in rows if r["kind"] == kind]
        y = np.asarray([r["y"] for r in sel])
        conds = np.asarray([r["cond"] for r in sel])
        p = loco(rows, CANDIDATES[ship], kind)
        for cond in groups:
            print(f"\nreliability, {ship}, {kind}, {cond} (leave one case out): bin | n | mean probability | moving")
            for label, n, mp, share in reliability(p[conds == cond], y[conds == cond]):
                print(f"| {label} | {n} | {mp:.3f} | {share:.3f} |")


if __name__ == "__main__":
    main()
