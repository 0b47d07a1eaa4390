"""Candidate instability models rescored on screened regional cases, leave one case out (run by hand, not a test).

    python tests/benchmarks/rescore_regional.py FILE.jsonl [FILE.jsonl ...]

Reads the per-case JSON lines that ``bench_regional.py --json`` writes (every segment with its
decision probabilities, its landscape evidence and, for main and lateral outlet-basin segments, its
truth), and for each candidate model of the instability prints issue 14's targets (top, order, steady
landscapes without an alarm) and the log loss, AUC and calibration error of the instability on main and
lateral segments, each case scored by the model fitted without it. No DEM is screened again: a candidate
changes only the instability, not the decision, its confidence or the motion azimuth.

The candidates are those of the fourth to thirty-eighth rounds of docs/validation.md (*Regional screening*);
``shipped now`` is screen.instability_of as it is (round 25's "transient aggressor S2(0.1), significant under DEM
error" on main divides with round 38's one-U run at 0.75 cell, "R0.75"; round 23's "L-noh" on lateral ones;
"both runs agree by 0.5, shipped coefficients" is round 11's r, shipped in rounds 11-16 and 21, and round 16's
c = -0.5 candidate is round 17's r), ``shipped
before round 11`` its coefficients with the run term they were fitted with (the one-U run agreeing by 0.1 cell);
neither is refitted.
A candidate whose part for one kind of divide is "now" takes the shipped model of that kind as it is when the
script is run (the other candidates keep their own definitions). Fits are maximum likelihood with a Gaussian
prior of sd 10 on every coefficient but the intercept (it keeps the fit finite where the data nearly separate).
``--rankings`` scores orders of the segments too (rounds 14-21: below a score, by a landscape run's shift; round
24: transient aggressors first; round 31: the run's shift either way; round 33: the larger of both runs' shifts
either way; round 34: main segments beside a strongly scored main segment first, from the gaps between main segments
that the records keep since then; round 36: those scores passed along chains of segments the runs move;
round 39: segments with a direction first; :data:`RANKINGS`); "by instability" (default) is the order of rounds
4-13, "shipped" screen.rank_key (round 36's C1 with round 39's D1; C1 alone was shipped in rounds 36-38) and "round
20" the key round 33 replaced. ``--per-basin-from`` reads another run in place of the per-basin one
(round 37). Give it training cases only.
"""

from __future__ import annotations

import argparse
import json
import math
import os
from collections.abc import Callable

import numpy as np
from bench_regional import probability_scores  # this folder (scripts run from here)
from scipy.optimize import minimize

from divides.assess.screen import (
    CHAIN_CELLS,
    INSTABILITY_SCALING,
    NEIGHBOUR_CELLS,
    PROMOTE_TOLD_ERROR_M,
    RUN_ORDER_BELOW,
    TRANSIENT_BASIN,
    evidence_features,
    instability_of,
    neighbour_scores,
    rank_key,
    run_size,
)
from divides.model.regional_benchmark import raises_alarm, ranking_targets

PRIOR_SD = 10.0
KINDS = ("main", "lateral")

#: screen.INSTABILITY_EVIDENCE as fitted (version 3); round 23 set the lateral hilltop coefficient to 0 in the shipped
#: model. Past candidates keep these, so that their figures do not move with the shipped model.
FITTED = {"main": (-27.16, 2.70, 16.06, 22.42), "lateral": (-3.89, 1.02, 8.07, 0.61)}


def _shift(m: dict, key: str = "forward_shift_cells") -> float | None:
    v = m.get(key)
    return None if v is None or not math.isfinite(v) else float(v)


def _favoured(p: dict) -> float:
    """+1.0 when the decision favours motion toward b (a is the aggressor), -1.0 toward a, 0.0 on a tie."""
    return float((p.get("b", 0.0) > p.get("a", 0.0)) - (p.get("b", 0.0) < p.get("a", 0.0)))


def _toward(p: dict, m: dict, key: str = "forward_shift_cells") -> float | None:
    """A run's shift toward the side the decision favours (model cells; None when unmeasured)."""
    s = _shift(m, key)
    return None if s is None else _favoured(p) * s


def _agrees(p: dict, m: dict, t: float, key: str = "forward_shift_cells") -> float:
    """1.0 when a run moves the divide >= t cells toward the favoured side (unmeasured or a tie: 0.0)."""
    s = _toward(p, m, key)
    return float(s is not None and s >= t and s != 0.0)


def _both_agree(p: dict, m: dict, t: float) -> float:
    """1.0 when both runs (one U; one U per outlet basin, round 10) agree by t cells."""
    return _agrees(p, m, t) * _agrees(p, m, t, "forward_shift_basin_cells")


def _lp_h(p: dict, m: dict) -> tuple[float, float]:
    """logit(P(a) + P(b)) and the signed hilltop contrast, as screen.evidence_features reads them."""
    lp, h, _ = evidence_features(p, m)
    return lp, h


def _old_r(p: dict, m: dict) -> float:
    """The run term of the model shipped before round 11: the one-U run agrees by 0.1 cell."""
    return _agrees(p, m, 0.1)


def _gate(t: float, unmeasured: bool) -> Callable[[dict, dict], list[float]]:
    def features(p, m):
        r = _agrees(p, m, t)
        return [*_lp_h(p, m), r, float(_shift(m) is None)] if unmeasured else [*_lp_h(p, m), r]
    return features


def _with_shift(gate: bool) -> Callable[[dict, dict], list[float]]:
    def features(p, m):
        s = float(np.clip(_toward(p, m) or 0.0, -2.0, 2.0))
        return [*_lp_h(p, m), _old_r(p, m), s] if gate else [*_lp_h(p, m), s]
    return features


def _split(t: float, both: bool = False) -> Callable[[dict, dict], list[float]]:
    """A logistic model on (logit p, h) of its own where the run (``both``: both runs) moves the divide >= t cells
    toward the favoured side, and another where it does not (the interaction with the agreement r)."""
    def features(p, m):
        (lp, h), r = _lp_h(p, m), (_both_agree(p, m, t) if both else _agrees(p, m, t))
        return [r, r * lp, r * h, (1.0 - r) * lp, (1.0 - r) * h]
    return features


def _gated(t: float) -> Callable[[dict, dict], list[float]]:
    """(logit p, h) count only where the run moves the divide >= t cells toward the favoured side; elsewhere
    the instability is one constant."""
    def features(p, m):
        (lp, h), r = _lp_h(p, m), _agrees(p, m, t)
        return [r, r * lp, r * h]
    return features


def _both_runs(product: bool, t: float = 0.1) -> Callable[[dict, dict], list[float]]:
    def features(p, m):
        if product:
            return [*_lp_h(p, m), _both_agree(p, m, t)]
        return [*_lp_h(p, m), _old_r(p, m), _agrees(p, m, 0.1, "forward_shift_basin_cells")]
    return features


def _shipped_with(r: Callable[[dict, dict], float]) -> Callable[[dict, dict, str], float]:
    """The linear predictor of the fitted evidence coefficients (:data:`FITTED`) with the run term ``r``."""
    def predictor(p, m, kind):
        alpha, beta, g_hill, g_run = FITTED[kind]
        lp, h = _lp_h(p, m)
        return alpha + beta * lp + g_hill * h + g_run * r(p, m)
    return predictor


_OLD = _shipped_with(_old_r)


def _recalibrated(t: float) -> Callable[[dict, dict], list[float]]:
    """The linear predictor with both runs agreeing by t cells, i.e. logit of that score (round 12's Platt
    recalibration), clipped to [1e-9, 1 - 1e-9] as a probability."""
    predictor = _shipped_with(lambda p, m: _both_agree(p, m, t))

    def features(p, m):
        return [float(np.clip(predictor(p, m, _kind(m)), -20.72, 20.72))]
    return features


def _ordered_left_out(gamma: float) -> Callable[[dict, dict, str], float]:
    """Round 13: the present default plus (1 - r) gamma clip(M, 0, 2), M the larger |shift| of the two runs."""
    present = _shipped_with(lambda p, m: _both_agree(p, m, 0.5))

    def predictor(p, m, kind):
        shifts = [abs(v) for v in (_shift(m), _shift(m, "forward_shift_basin_cells")) if v is not None]
        left_out = 1.0 - _both_agree(p, m, 0.5)
        return present(p, m, kind) + left_out * gamma * float(np.clip(max(shifts, default=0.0), 0.0, 2.0))
    return predictor


def _beyond_one(p: dict, m: dict) -> list[float]:
    return [float(np.clip((_toward(p, m) or 0.0) - 1.0, 0.0, 2.0))]


#: name -> (features, offset by the model shipped before round 11, unmeasured one-U shift falls back to the
#: P-only scaling); a callable in place of features: a model with the fitted evidence coefficients and that
#: run term, nothing fitted. "shipped now" is screen.instability_of as it is (round 11's winner).
CANDIDATES: dict[str, tuple] = {
    "shipped now": ("now", False, False),
    "shipped before round 11": (_OLD, False, False),
    "refit": (_gate(0.1, False), False, False),
    "shift": (_with_shift(False), False, False),
    "gate+shift": (_with_shift(True), False, False),
    **{f"gate{t:g}+unmeasured": (_gate(t, True), False, False) for t in (0.1, 0.25, 0.5, 1.0)},
    **{f"gate{t:g}": (_gate(t, False), False, False) for t in (0.25, 0.5, 1.0)},
    "shipped before round 11, unmeasured as P-only": (_OLD, False, True),
    "shipped before round 11 + beyond 1 cell": (_beyond_one, True, False),
    "shipped before round 11 + beyond 1 cell, unmeasured as P-only": (_beyond_one, True, True),
    **{f"split{t:g}": (_split(t), False, True) for t in (0.1, 0.25, 0.5)},
    **{f"gated{t:g}": (_gated(t), False, True) for t in (0.1, 0.25, 0.5)},
    "both runs agree by 0.1, shipped coefficients": (_shipped_with(lambda p, m: _both_agree(p, m, 0.1)), False, False),
    "both runs, refitted": (_both_runs(False), False, False),
    "both runs agree, refitted": (_both_runs(True), False, False),
    **{f"both runs agree by {t:g}, shipped coefficients": (_shipped_with(lambda p, m, t=t: _both_agree(p, m, t)),
                                                            False, False) for t in (0.25, 0.5)},
    **{f"both runs agree by {t:g}, refitted": (_both_runs(True, t), False, False) for t in (0.25, 0.5)},
    "both runs agree by 0.5, recalibrated": (_recalibrated(0.5), False, False),
    **{f"present, left-out segments ordered by the larger shift, gamma {g:g}": (_ordered_left_out(g), False, False)
       for g in (1.0, 3.0)},
}

#: Round 15: the main divide's instability as shipped, the lateral one's refitted: (logit p, h, r) with r both runs
#: agreeing by 0.5 cell (L1), or one model of (logit p, h) per side of that agreement (L2).
CANDIDATES.update({
    "lateral refitted with both runs agreeing by 0.5 (L1)": ({"main": "now", "lateral": _both_runs(True, 0.5)},
                                                             False, False),
    "lateral split by both runs agreeing by 0.5 (L2)": ({"main": "now", "lateral": _split(0.5, both=True)},
                                                        False, False),
})


def _not_contradicted(c: float, strict: bool) -> Callable[[dict, dict], float]:
    """Round 16: 1.0 when the one-U run moves the divide >= 0.5 cell toward the favoured side and the per-basin run's
    shift toward it is >= c (> c when ``strict``; unmeasured: 0.0)."""
    def r(p, m):
        t2 = _toward(p, m, "forward_shift_basin_cells")
        return _agrees(p, m, 0.5) * float(t2 is not None and (t2 > c if strict else t2 >= c))
    return r


CANDIDATES.update({f"one-U run agrees by 0.5, per-basin run's shift {'>' if strict else '>='} {c:g}": (
    _shipped_with(_not_contradicted(c, strict)), False, False)
    for c, strict in ((-0.5, True), (-0.25, False), (0.0, False))})


def _present_r(p: dict, m: dict) -> float:
    """Round 17's r, shipped when round 19 was scored (the one-U run agrees by 0.5, the per-basin run's shift
    > -0.5)."""
    return _not_contradicted(-0.5, True)(p, m)


def _lateral_present(p: dict, m: dict) -> list[float]:
    return [*_lp_h(p, m), _present_r(p, m)]


def _lateral_no_hill(p: dict, m: dict) -> list[float]:
    return [_lp_h(p, m)[0], _present_r(p, m)]


def _lateral_split_present(p: dict, m: dict) -> list[float]:
    (lp, h), r = _lp_h(p, m), _present_r(p, m)
    return [r, r * lp, r * h, (1.0 - r) * lp, (1.0 - r) * h]


#: Round 19: the main divide's instability as shipped, the lateral one's refitted with the present r.
CANDIDATES.update({name: ({"main": "now", "lateral": f}, False, False) for name, f in (
    ("lateral refitted with the present r (M1)", _lateral_present),
    ("lateral refitted with the present r, no hilltops (M2)", _lateral_no_hill),
    ("lateral split by the present r (M3)", _lateral_split_present))})


def _transient_r(form: str, tau: float) -> Callable[[dict, dict], float]:
    """Round 22: round 11's r, or 1.0 where the one-U run moves the divide >= 0.5 cell toward the favoured side,
    the per-basin run's shift toward it is > -0.5 (unmeasured: no), and the aggressor's basin is transient:
    ``form`` "A" its transience >= tau, "AA" its absolute value, "D" it minus the victim's, "S2" (round 25) its
    absolute value >= tau and >= twice its spread under the DEM error model (NaN: no)."""
    def r(p, m):
        if _both_agree(p, m, 0.5):  # round 11's r
            return 1.0
        t2 = _toward(p, m, "forward_shift_basin_cells")
        favoured = _favoured(p)
        if not (_agrees(p, m, 0.5) and t2 is not None and t2 > -0.5 and favoured):
            return 0.0
        aggressor, victim = (_shift(m, k) for k in (("transience_a", "transience_b") if favoured > 0
                                                     else ("transience_b", "transience_a")))
        if form == "S2":  # round 25: |T| >= tau and at least twice its spread under the DEM error model
            sd = _shift(m, "transience_sd_a" if favoured > 0 else "transience_sd_b")
            return float(aggressor is not None and sd is not None and abs(aggressor) >= max(tau, 2.0 * sd))
        value = {"A": aggressor, "AA": None if aggressor is None else abs(aggressor),
                 "D": None if aggressor is None or victim is None else aggressor - victim}[form]
        return float(value is not None and value >= tau)
    return r


#: Round 22: main segments with round 11's r widened to transient aggressor basins (fitted coefficients); lateral
#: as shipped then (round 11's r).
_ROUND_11 = _shipped_with(lambda p, m: _both_agree(p, m, 0.5))
CANDIDATES.update({f"transient aggressor {form}({tau:g})": ({"main": _shipped_with(_transient_r(form, tau)),
                                                            "lateral": _ROUND_11}, False, False)
                   for form in ("AA", "A", "D") for tau in (0.1, 0.2, 0.4)})



def _lateral_hill(gate: bool) -> Callable[[dict, dict, str], float]:
    """Round 23: the fitted lateral coefficients with the hilltop term left out (``gate`` False) or counted only
    where both runs agree (r = 1)."""
    def predictor(p, m, kind):
        alpha, beta, g_hill, g_run = FITTED[kind]
        lp, h, r = evidence_features(p, m, kind)
        return alpha + beta * lp + (g_hill * h * r if gate else 0.0) + g_run * r
    return predictor


def _lateral_gate_refit(p: dict, m: dict) -> list[float]:
    lp, h, r = evidence_features(p, m, "lateral")
    return [lp, h * r, r]


#: Round 25: round 22's transient aggressor read only when |T| is at least twice its spread under the DEM error
#: model (transience_sd_a / _b); lateral as shipped (round 23).
CANDIDATES["transient aggressor S2(0.1), significant under DEM error"] = (
    {"main": _shipped_with(_transient_r("S2", 0.1)), "lateral": "now"}, False, False)
#: Round 26 (scored under DEM error): round 23's default, round 22's transient aggressor AA(0.1) without the spread.
CANDIDATES["round 23's default: transient aggressor AA(0.1), lateral as now"] = (
    {"main": _shipped_with(_transient_r("AA", 0.1)), "lateral": "now"}, False, False)


def _main_no_hill(p: dict, m: dict) -> list[float]:
    lp, _, r = evidence_features(p, m, "main")
    return [lp, r]


#: Round 28: main divides without the hilltop term (round 23's change to lateral ones), with the shipped r.
CANDIDATES.update({
    "main without hilltops (M-noh)": ({"main": _lateral_hill(False), "lateral": "now"}, False, False),
    "main refitted without hilltops (M-noh-refit)": ({"main": _main_no_hill, "lateral": "now"}, False, False),
})

#: Round 23: the main divide's instability as shipped, the lateral one's hilltop term dropped or gated by r.
CANDIDATES.update({
    "lateral without hilltops (L-noh)": ({"main": "now", "lateral": _lateral_hill(False)}, False, False),
    "lateral hilltops only where both runs agree (L-gate)": ({"main": "now", "lateral": _lateral_hill(True)},
                                                             False, False),
    "lateral refitted on logit p, h r, r (L-gate-refit)": ({"main": "now", "lateral": _lateral_gate_refit},
                                                           False, False),
})


def _present_main(p: dict, m: dict) -> list[float]:
    return list(evidence_features(p, m, "main"))


def _present_lateral(p: dict, m: dict) -> list[float]:
    lp, _, r = evidence_features(p, m, "lateral")
    return [lp, r]


#: Round 35: the shipped features (round 25's r, round 30's hilltops, none on lateral divides) with their coefficients
#: refitted (F-E0 on the files scored; F-all with ``--fit-with`` the same cases under other DEM errors).
CANDIDATES["F: present features refitted"] = ({"main": _present_main, "lateral": _present_lateral}, False, False)


def _one_u_at(t: float) -> Callable[[dict, dict], float]:
    """Round 38: the shipped r with the one-U run's threshold at ``t`` model cells in both of its branches (both runs
    agreeing; the transient aggressor's), the per-basin run's thresholds as shipped."""
    def r(p, m):
        return evidence_features(p, m, "main", one_u_cells=t)[2]
    return r


#: Round 38: the main divides' r with a longer one-U shift; lateral divides as shipped.
CANDIDATES.update({f"R{t:g}: the main divides' one-U run at {t:g} cell": (
    {"main": _shipped_with(_one_u_at(t)), "lateral": "now"}, False, False) for t in (0.5, 0.75, 1.0)})


def _fixed(features) -> bool:
    """A candidate part with the fitted evidence coefficients and its own run term (nothing fitted)."""
    return getattr(features, "__name__", "") == "predictor"


def _of_kind(candidate: str, kind: str | None) -> tuple:
    """The candidate's (features, offset, fallback) for one kind of divide (round 15 gives each kind its own)."""
    features, offset, fallback = CANDIDATES[candidate]
    return (features.get(kind, "now") if isinstance(features, dict) else features), offset, fallback


def _kind(m: dict) -> str | None:
    return m.get("kind") or m.get("divide_kind")


def _labelled(rows: list[dict]):
    for r in rows:
        for m in r["main"] + r.get("lateral", []):
            if m["probabilities"] is not None and (m["in_moving"] or m["in_stable"]):
                yield m, float(m["in_moving"])


def fit(rows: list[dict], kind: str, candidate: str) -> np.ndarray | None:
    """The candidate's coefficients for one kind of divide (None when nothing is fitted)."""
    features, offset, fallback = _of_kind(candidate, kind)
    if features == "now" or _fixed(features):
        return None
    data = [(features(m["probabilities"], m), y, _OLD(m["probabilities"], m, kind) if offset else 0.0)
            for m, y in _labelled(rows) if _kind(m) == kind and not (fallback and _shift(m) is None)]
    x = np.asarray([d[0] for d in data], dtype=float)
    y = np.asarray([d[1] for d in data])
    o = np.asarray([d[2] for d in data])
    design = x if offset else np.column_stack([np.ones(y.size), x])
    penalised = slice(0, None) if offset else slice(1, None)

    def loss(w):
        t = o + design @ w
        return float(np.sum(np.logaddexp(0.0, t) - y * t) + np.sum(w[penalised] ** 2) / (2 * PRIOR_SD ** 2))

    def grad(w):
        t = o + design @ w
        g = design.T @ (1.0 / (1.0 + np.exp(-t)) - y)
        g[penalised] += w[penalised] / PRIOR_SD ** 2
        return g

    return minimize(loss, np.zeros(design.shape[1]), jac=grad, method="BFGS").x


def instability(m: dict, w: np.ndarray | None, candidate: str) -> float | None:
    p, kind = m["probabilities"], _kind(m)
    if p is None or kind not in KINDS:
        return m["instability"]
    features, offset, fallback = _of_kind(candidate, kind)
    if fallback and _shift(m) is None:
        return instability_of(p, kind)
    if features == "now":
        return instability_of(p, kind, m)
    if _fixed(features):
        t = features(p, m, kind)
    else:
        x = np.asarray(features(p, m))
        t = (_OLD(p, m, kind) + x @ w) if offset else (w[0] + x @ w[1:])
    return float(1.0 / (1.0 + math.exp(-t))) if t > -700 else 0.0


def _run_key(pick: Callable[[list[float]], float] | None) -> Callable[[dict], float | None]:
    """A segment's runs' shift toward the favoured side: the one-U run's (``pick`` None) or ``pick`` of both
    measured ones (0 when no side is favoured); None when unmeasured or without probabilities."""
    def key(m):
        p = m["probabilities"]
        if p is None:
            return None
        if pick is None:
            return _toward(p, m)
        both = [_toward(p, m, k) for k in ("forward_shift_cells", "forward_shift_basin_cells")]
        return pick(both) if None not in both else None
    return key


def _unknown_joins(variant: str) -> Callable[[dict], float | None]:
    """Round 18: the one-U run's |shift| of an unknown segment that joins the tier below 0.01, else None.
    U1: the per-basin run does not move it >= 0.5 cell the other way; U2: U1 and |shift| >= 0.5; U3: measured."""
    def key(m):
        s1, s2 = _shift(m), _shift(m, "forward_shift_basin_cells")
        if s1 is None or s1 == 0.0:
            return None
        if variant == "U3":
            return abs(s1)
        if s2 is None or math.copysign(1.0, s1) * s2 <= -0.5 or (variant == "U2" and abs(s1) < 0.5):
            return None
        return abs(s1)
    return key


def _tiered(t: float, run: Callable[[dict], float | None], unmeasured: float = -math.inf,
            unknown: Callable[[dict], float | None] | None = None) -> Callable[[dict], tuple]:
    """Rounds 14-20: segments scored >= t by score; those below after them by ``run`` (larger first; a segment
    without a run value takes ``unmeasured``: -inf last, +inf first), then by score; unknown ones last, but
    those ``unknown`` gives a value join the tier below t with it."""
    def key(m):
        i = m["_i"]
        if i is None:
            joins = unknown(m) if unknown is not None else None
            return (2, 0.0, 0.0) if joins is None else (1, -joins, 0.0)
        if i >= t:
            return (0, -i, 0.0)
        v = run(m)
        return (1, -(unmeasured if v is None else v), -i)
    return key


_K2, _U2 = _run_key(None), _unknown_joins("U2")


def _round20(m: dict) -> tuple:
    """screen.rank_key as shipped in rounds 20-32: below 0.01 by the one-U run's shift toward the favoured side
    (unmeasured or no side favoured first), then by instability; unknown segments join by round 18's U2."""
    i, p = m["_i"], m["probabilities"]
    if i is None:
        joins = _U2(m)
        return (2, 0.0, 0.0) if joins is None else (1, -joins, 0.0)
    if i >= RUN_ORDER_BELOW:
        return (0, -i, 0.0)
    side, shift = _favoured(p or {}), _shift(m)
    return (1, -math.inf if shift is None or not side else -side * shift, -i)


def _rank_key_to_53(i: float | None, evidence: dict, promote: bool = False) -> tuple:
    """screen.rank_key as shipped from round 48 to round 53: with ``promote``, a first-tier segment without a direction
    stayed in the first tier (round 54 moves it to the second)."""
    likely = (promote or run_size(evidence) is None) and (evidence.get("motion_probability") or 0.0) >= 0.5
    if i is not None and (i >= RUN_ORDER_BELOW or likely):
        return (0, float(not _points(evidence)), -i, 0.0)
    return rank_key(i, evidence, promote=promote)


def _before_round50(m: dict, p: float | None, promote: bool = False) -> tuple:
    """screen.rank_key of a segment as shipped before round 50, its probability of motion ``p``: without ``promote``
    (round 48: a told error of 3 m or more) a segment neither landscape run measured was not promoted by it."""
    seen = p if promote or run_size(m) is not None else None
    return _rank_key_to_53(m["_i"], {**m, "motion_probability": seen}, promote=promote)


#: name -> sort key over segments whose instability is in ``_i`` (ties by the screened rank). "by instability" is
#: the ranking of rounds 4-13; K1-K3 round 14's candidates, U1-U3 round 18's (on K2 below 0.01), V1-V2 round
#: 20's (on U2), R18 round 21's (rounds 14 and 18); "shipped" is screen.rank_key as shipped from round 39 to 47
#: (round 36's C1 with round 39's D1), "round 20" the one round 33 replaced; T1 (round 24), A1 (round 31), A3 and
#: A3-0 (round 33), N2, N5, N10 and N5-0.5 (round 34; N5 shipped), C1 and C0.5 (round 36; C1 shipped in rounds
#: 36-38), D1-D3 (round 39; D1 shipped), E3 (round 48), U1 (round 50, shipped to round 53), W5 and W9 (round 51),
#: Z1 and Z2 (round 52), M5 and M9 (round 53), G1 and G2 (round 54; G2 shipped) and S1 and S2 (round 55; S1 is
#: screen.rank_key as shipped now) are added below.
RANKINGS: dict[str, Callable[[dict], tuple]] = {
    "by instability": _tiered(-math.inf, _K2),
    "shipped": lambda m: _before_round50(m, m.get("motion_probability")),
    "round 20 (shipped in rounds 20-32)": _round20,
    **{f"{name}, below {t:g}": _tiered(t, _run_key(pick)) for t in (0.01, 0.5)
       for name, pick in (("K1 smaller of both runs", min), ("K2 one-U run", None), ("K3 larger of both runs", max))},
    **{f"shipped, unknown segments by the run ({v})": _tiered(0.01, _K2, unknown=_unknown_joins(v))
       for v in ("U1", "U2", "U3")},
    **{f"shipped, unmeasured run {name} ({v})": _tiered(0.01, _K2, unmeasured=value, unknown=_U2)
       for v, name, value in (("V1", "first", math.inf), ("V2", "as 0", 0.0))},
    "R18: rounds 14 and 18": _tiered(0.01, _K2, unknown=_U2),
}


def _transient_first(m: dict) -> tuple:
    """Round 24 (T1): round 20's ranking, but in its second tier the segments whose aggressor's basin (away from the
    favoured side) has |transience| >= TRANSIENT_BASIN come first (unknown segments joining the tier do not)."""
    key = _round20(m)
    if key[0] != 1:
        return (key[0], 0, *key[1:])
    p = m["probabilities"]
    side = _favoured(p) if m["_i"] is not None and p is not None else 0.0
    t = _shift(m, "transience_a" if side > 0 else "transience_b") if side else None
    return (1, 0 if t is not None and abs(t) >= TRANSIENT_BASIN else 1, *key[1:])


RANKINGS["T1: transient aggressors first below 0.01"] = _transient_first


def _either_way(m: dict) -> tuple:
    """Round 31 (A1): round 20's ranking, but its second tier (known segments below 0.01) by the one-U run's |shift|,
    either direction, larger first (unmeasured first), then by instability."""
    key = _round20(m)
    if key[0] != 1 or m["_i"] is None:
        return key
    shift = _shift(m)
    return (1, -math.inf if shift is None else -abs(shift), -m["_i"])


RANKINGS["A1: below 0.01 by the one-U run's shift either way"] = _either_way


def _size(m: dict) -> float | None:
    """The larger |shift| of the two landscape runs (None when neither measured the segment)."""
    shifts = [abs(v) for v in (_shift(m), _shift(m, "forward_shift_basin_cells")) if v is not None]
    return max(shifts) if shifts else None


def _larger_either_way(unmeasured_first: bool) -> Callable[[dict], tuple]:
    """Round 33: round 20's ranking, but its second tier (known segments below 0.01 and the unknown ones that join it)
    by the larger |shift| of the two runs, either direction, larger first; a segment neither run measured comes
    first (A3, shipped: screen.rank_key) or counts as 0 (A3-0); then by instability."""
    def key(m):
        k = _round20(m)
        if k[0] != 1:
            return k
        size = _size(m)
        size = size if size is not None else (math.inf if unmeasured_first else 0.0)
        return (1, -size, 0.0 if m["_i"] is None else -m["_i"])
    return key


RANKINGS["A3: below 0.01 by the larger shift of both runs either way"] = _larger_either_way(True)
RANKINGS["A3-0: as A3, unmeasured as 0"] = _larger_either_way(False)
_A3 = _larger_either_way(True)


def _beside_scored(gap: float, score: float) -> Callable[[dict], tuple]:
    """Round 34: A3, but in its second tier a main segment with another main segment within ``gap`` cells scored at
    least ``score`` comes first (``_near``: the gaps and scores of its recorded neighbours, set by :func:`targets`)."""
    def key(m):
        k = _A3(m)
        if k[0] != 1:
            return k
        near = any(g <= gap and i is not None and i >= score for g, i in m["_near"])
        return (1, -float(near), *k[1:])
    return key


for _gap, _score, _name in ((2, 0.01, "N2"), (5, 0.01, "N5"), (10, 0.01, "N10"), (5, 0.5, "N5-0.5")):
    RANKINGS[f"{_name}: below 0.01, beside a main segment scored >= {_score:g} within {_gap} cells first"] = \
        _beside_scored(_gap, _score)


def _chained(moved: float) -> Callable[[dict], tuple]:
    """Round 36: round 34's key, the neighbours' largest score passed along chains of main segments scored below
    0.01 that either run moves at least ``moved`` cells (``_chain``: that score, set by :func:`targets`)."""
    def key(m):
        k = _A3(m)
        if k[0] != 1:
            return k
        return (1, -float(m["_chain"][moved] is not None and m["_chain"][moved] >= RUN_ORDER_BELOW), *k[1:])
    return key


CHAIN_MOVED = (1.0, 0.5)
for _moved, _name in zip(CHAIN_MOVED, ("C1", "C0.5")):
    RANKINGS[f"{_name}: as N5, the neighbours' scores passed along segments below 0.01 moved >= {_moved:g} cell"] = \
        _chained(_moved)


def _points(m: dict) -> bool:
    """Whether the decision gives the segment a direction (a verdict toward a or b), hence a motion azimuth."""
    return m.get("verdict") in ("a", "b")


def _pointing_first(tiers: tuple[int, ...], demote: bool = False) -> Callable[[dict], tuple]:
    """Round 39: screen.rank_key, but within each tier in ``tiers`` the segments with a direction first (D1: the top
    tier; D3: the top two); with ``demote`` (D2) top-tier segments without one join the tier below instead. Written
    on round 38's rank_key (C1); since D1 shipped, rank_key holds D1 itself, and each candidate ranks as it did."""
    def key(m):
        i = m["_i"]
        if demote and i is not None and i >= RUN_ORDER_BELOW and not _points(m):
            k = rank_key(0.0, m)  # ordered as the segments scored below RUN_ORDER_BELOW, then by the score
            return (k[0], 0.0, *k[1:3], -i)
        k = rank_key(i, m)
        return (k[0], float(k[0] in tiers and not _points(m)), *k[1:])
    return key


for _name, _tiers, _demote in (("D1", (0,), False), ("D2", (), True), ("D3", (0, 1), False)):
    RANKINGS[f"{_name}: segments with a direction first (round 39)"] = _pointing_first(_tiers, _demote)


def _q1(m: dict) -> tuple:
    """Round 43's Q1: the probability of motion (``_p``) in place of the score: P >= 0.5 first (those with a
    direction first, by P); below, the shipped second tier's groups and keys, then P."""
    p = m.get("_p")
    if p is not None and p >= 0.5:
        return (0, float(not _points(m)), -p, 0.0)
    k = rank_key(None if m["_i"] is None else 0.0, m)
    return (*k[:3], -(p or 0.0))


def _q2(m: dict) -> tuple:
    """Round 43's Q2: the shipped tiers, each ordered by P within its groups (unknown segments the runs move, which
    have no P, after the scored ones of the second tier)."""
    p, k = m.get("_p"), rank_key(m["_i"], m)
    if k[0] == 0:
        return (0, k[1], -p, 0.0)
    if k[0] == 1:
        return (1, 0.0, -p, 0.0) if p is not None else (1, 1.0, k[2], 0.0)
    return k


def _q3(m: dict) -> tuple:
    """Round 43's Q3: by P alone, P >= 0.5 with a direction first; unknown segments the runs move after every scored
    one, the other unknown ones last."""
    p = m.get("_p")
    if p is not None:
        return (0 if p >= 0.5 and _points(m) else 1, -p, 0.0, 0.0)
    k = rank_key(None, m)
    return (2 + k[0] - 1, *k[1:])


def _q1a(m: dict) -> tuple:
    """Round 45's Q1a: the first tier takes the segments scored >= RUN_ORDER_BELOW and those with P >= 0.5, those
    with a direction first, each group by the score."""
    p, i = m.get("_p"), m["_i"]
    if i is not None and (i >= RUN_ORDER_BELOW or (p is not None and p >= 0.5)):
        return (0, float(not _points(m)), -i, 0.0)
    return rank_key(i, m)


def _q1b(m: dict) -> tuple:
    """Round 45's Q1b: the first tier keeps only the segments scored >= RUN_ORDER_BELOW with P >= 0.5; the others
    join the second tier."""
    p, i = m.get("_p"), m["_i"]
    if i is not None and i >= RUN_ORDER_BELOW and (p is None or p < 0.5):
        k = rank_key(0.0, m)  # ordered as the segments scored below RUN_ORDER_BELOW, then by the score
        return (*k[:3], -i)
    return rank_key(i, m)


def _q1c(m: dict) -> tuple:
    """Round 45's Q1c: the shipped first tier, those with a direction first, each group by P."""
    k = rank_key(m["_i"], m)
    return (0, k[1], -m["_p"], 0.0) if k[0] == 0 else k


RANKINGS["Q1: the probability of motion in place of the score (round 43)"] = _q1
RANKINGS["Q2: the shipped tiers ordered by the probability of motion (round 43)"] = _q2
RANKINGS["Q3: by the probability of motion alone (round 43)"] = _q3
RANKINGS["Q1a: round 43's first tier, its promotion alone (round 45)"] = _q1a
RANKINGS["E3: Q1a where the told DEM error is 3 m or more (round 48)"] = \
    lambda m: _before_round50(m, m.get("_p"), m.get("_told_m", 1.0) >= PROMOTE_TOLD_ERROR_M)


def _u1(m: dict) -> tuple:
    """Round 50's U1, shipped to round 53: E3 (round 48), and a segment neither landscape run measured joins the first
    tier when its probability of motion is 0.5 or more, at any told error."""
    return _rank_key_to_53(m["_i"], {**m, "motion_probability": m.get("_p")},
                           promote=m.get("_told_m", 1.0) >= PROMOTE_TOLD_ERROR_M)


RANKINGS["U1: E3, and segments neither run measured promoted by the probability of motion (round 50)"] = _u1


def _pointing_promoted(least: float) -> Callable[[dict], tuple]:
    """Round 51's W5 and W9: U1, and a segment the decision gives a direction joins the first tier when its
    probability of motion is at least ``least``, at any told error."""
    def key(m: dict) -> tuple:
        p = m.get("_p")
        promote = m.get("_told_m", 1.0) >= PROMOTE_TOLD_ERROR_M or (_points(m) and p is not None and p >= least)
        return _rank_key_to_53(m["_i"], {**m, "motion_probability": p}, promote=promote)
    return key


for _least, _name in ((0.5, "W5"), (0.9, "W9")):
    RANKINGS[f"{_name}: U1, and segments with a direction promoted at P >= {_least:g} (round 51)"] = \
        _pointing_promoted(_least)


def _run_toward_verdict(m: dict) -> float | None:
    """The larger shift of the two landscape runs toward the side the decision gives (model cells; None when the
    segment has no direction or neither run measured it)."""
    if not _points(m):
        return None
    sign = 1.0 if m["verdict"] == "b" else -1.0
    shifts = [sign * s for s in (_shift(m), _shift(m, "forward_shift_basin_cells")) if s is not None]
    return max(shifts) if shifts else None


def _pointing_promoted_run(least: float) -> Callable[[dict], tuple]:
    """Round 53's M5 and M9: as round 51's W5 and W9, but the promoted segment must also be moved at least
    CHAIN_CELLS toward the side the decision gives by either landscape run."""
    def key(m: dict) -> tuple:
        p, toward = m.get("_p"), _run_toward_verdict(m)
        promote = m.get("_told_m", 1.0) >= PROMOTE_TOLD_ERROR_M or (
            p is not None and p >= least and toward is not None and toward >= CHAIN_CELLS)
        return _rank_key_to_53(m["_i"], {**m, "motion_probability": p}, promote=promote)
    return key


for _least, _name in ((0.5, "M5"), (0.9, "M9")):
    RANKINGS[f"{_name}: W{_least * 10:g}, and a landscape run moves the segment >= 1 cell its way (round 53)"] = \
        _pointing_promoted_run(_least)


def _aimless_demoted_when_noisy(p_below: float | None) -> Callable[[dict], tuple]:
    """Round 54's G1 (``p_below`` 0.5) and G2 (None): U1, and where the screening is told PROMOTE_TOLD_ERROR_M or
    more, a first-tier segment without a direction (G1: and a probability of motion below ``p_below``) joins the
    second tier, ordered as its segments and then by the score (round 39's D2 under noise). G2 shipped in round 54;
    screen.rank_key now is round 55's S1, built on it."""
    def key(m: dict) -> tuple:
        k, p = _u1(m), m.get("_p")
        if (k[0] != 0 or _points(m) or m.get("_told_m", 1.0) < PROMOTE_TOLD_ERROR_M
                or (p_below is not None and p is not None and p >= p_below)):
            return k
        second = rank_key(0.0, {**m, "motion_probability": None})
        return (*second[:3], -m["_i"])
    return key


RANKINGS["G1: U1, and told 3 m or more, first-tier segments without a direction at P < 0.5 join the second tier "
         "(round 54)"] = _aimless_demoted_when_noisy(0.5)
_G2 = ("G2: U1, and told 3 m or more, every first-tier segment without a direction joins the second tier "
       "(round 54)")
RANKINGS[_G2] = _aimless_demoted_when_noisy(None)


def _directed_by_run(least: float | None) -> Callable[[dict], tuple]:
    """Round 55's S1 (``least`` 0.9) and S2 (None): G2, and the first-tier segments with a direction (S1: those scored
    at least ``least``, ahead of the others) ordered by the larger shift of the two landscape runs toward the side the
    decision gives (larger first; neither run measured first), then by the score. Where the score saturates, it no
    longer tells a divide that moves fast from one that barely moves. S1 shipped: it is screen.rank_key now."""
    def key(m: dict) -> tuple:
        k = RANKINGS[_G2](m)
        if k[0] != 0 or k[1] != 0.0 or (least is not None and m["_i"] < least):
            return k
        toward = _run_toward_verdict(m)
        return (0, 0.0, -2.0, -math.inf if toward is None else -toward, -m["_i"])
    return key


RANKINGS["S1: G2, and first-tier segments with a direction scored >= 0.9 first, by the runs' shift their way "
         "(round 55)"] = _directed_by_run(0.9)
RANKINGS["S2: G2, and every first-tier segment with a direction by the runs' shift its way (round 55)"] = \
    _directed_by_run(None)


def _second_tier_by_p(beside_first: bool) -> Callable[[dict], tuple]:
    """Round 52's Z1 (``beside_first``) and Z2: U1, and where the screening is told PROMOTE_TOLD_ERROR_M or more, the
    second tier ordered by P (Z1: the segments beside a strongly scored one still first) in place of the runs' shift;
    its segments without a P after those with one, by the runs' shift."""
    def key(m: dict) -> tuple:
        k, p = _u1(m), m.get("_p")
        if k[0] != 1 or m.get("_told_m", 1.0) < PROMOTE_TOLD_ERROR_M:
            return k
        beside = k[1] if beside_first else 0.0
        return (1, beside, 0.0, -p) if p is not None else (1, beside, 1.0, k[2])
    return key


RANKINGS["Z1: U1, and told 3 m or more, the second tier by P after the beside-scored (round 52)"] = \
    _second_tier_by_p(True)
RANKINGS["Z2: U1, and told 3 m or more, the second tier by P alone (round 52)"] = _second_tier_by_p(False)

RANKINGS["Q1b: round 43's first tier, its demotion alone (round 45)"] = _q1b
RANKINGS["Q1c: round 43's first tier, its order alone (round 45)"] = _q1c


def _chain_scores(main: list[dict], moved: float) -> None:
    """Each main segment's ``_chain[moved]``: screen.neighbour_scores from its recorded neighbours within
    NEIGHBOUR_CELLS, the candidate's scores and chains through segments moved at least ``moved`` cells (round 36)."""
    index = {m["rank"]: k for k, m in enumerate(main)}
    near = [[index[r] for r, gap in m.get("neighbours", []) if gap <= NEIGHBOUR_CELLS] for m in main]
    values = neighbour_scores(near, [m["_i"] for m in main], [_size(m) for m in main], moved)
    for m, value in zip(main, values):
        m.setdefault("_chain", {})[moved] = value


def targets(case: dict, ranking: str = "by instability") -> dict:
    """Issue 14's targets of one case from the instabilities in ``_i``, by regional_benchmark.score's rules."""
    by_rank = {m["rank"]: m for m in case["main"]}
    for m in case["main"]:
        m["_near"] = [(gap, by_rank[r]["_i"]) for r, gap in m.get("neighbours", [])]
    for moved in CHAIN_MOVED:
        _chain_scores(case["main"], moved)
    for m in case["main"]:  # the neighbours' scores under the candidate, as screen.rank_segments reads them
        m["neighbour_instability"] = m["_chain"][CHAIN_CELLS]
    ranked = sorted(case["main"], key=lambda m: (*RANKINGS[ranking](m), m["rank"]))
    main = [{**m, "rank": i + 1, "instability": m["_i"]} for i, m in enumerate(ranked)]
    out = ranking_targets(main, moving_truth=case["moving_stretches"] > 0)
    steady = case["family"].startswith("steady_")
    alarms = sum(raises_alarm({**m, "instability": m["_i"]}) for m in case["main"] + case["others"])
    return {"top": out["top_ok"], "order": out["order_ok"], "alarms": alarms if steady else None,
            "alarm_ok": (alarms == 0) if steady else None}


def scores(rows: list[dict], kind: str) -> dict:
    """bench_regional.probability_scores of ``_i`` on the segments of ``kind`` with a truth."""
    pairs = [(m["_i"], y) for m, y in _labelled(rows) if _kind(m) == kind]
    return probability_scores([p[0] for p in pairs], [p[1] for p in pairs])


def _load(names: list[str]) -> list[dict]:
    """The cases of bench_regional.py --json outputs, each keyed by its master seed and index (``_case``; by its
    file's name and index in outputs written before the records kept the master seed)."""
    rows = []
    for name in names:
        with open(name) as fh:
            for line in fh:
                row = json.loads(line)
                rows.append({**row, "_case": (row.get("master_seed", os.path.basename(name)), row["index"])})
    return rows


def _replace_run(rows: list[dict], key: str) -> None:
    """Round 37: every segment's ``forward_shift_basin_cells`` replaced by its ``key`` (a run under another
    balance), so that every candidate and ranking reads that run where it read the per-basin one."""
    for row in rows:
        for m in row["main"] + row.get("lateral", []) + row["others"]:
            if key not in m:
                raise SystemExit(f"--per-basin-from: the records have no {key!r}; screen with --extra-balances")
            m["forward_shift_basin_cells"] = m[key]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("files", nargs="+", help="bench_regional.py --json outputs (training cases)")
    parser.add_argument("--candidates", nargs="*", default=list(CANDIDATES), choices=list(CANDIDATES))
    parser.add_argument("--rankings", nargs="*", default=["by instability"], choices=list(RANKINGS),
                        help="orders of the segments (rounds 14-21), each scored with every candidate")
    parser.add_argument("--fit-with", nargs="*", default=[], metavar="FILE",
                        help="outputs for the same cases screened otherwise (e.g. under another DEM error), used in "
                             "the fits only; a case (master seed and index) is left out of its own fit in every file")
    parser.add_argument("--fit-with-only", action="store_true",
                        help="fit on the --fit-with files alone (e.g. score under DEM error what was fitted without)")
    parser.add_argument("--per-basin-from", default=None, metavar="KEY",
                        help="read every segment's per-basin run from this record key instead (round 37: e.g. "
                             "forward_shift_steady-local10_cells, recorded by bench_regional.py --extra-balances)")
    args = parser.parse_args()
    rows, extra = _load(args.files), _load(args.fit_with)
    if args.per_basin_from:
        _replace_run(rows + extra, args.per_basin_from)
    fitted_on = (lambda: extra) if args.fit_with_only else (lambda: rows + extra)
    print(f"{len(rows)} cases ({len(extra)} more for fitting); the P-only scaling for unmeasured shifts: "
          f"{INSTABILITY_SCALING}")
    for candidate in args.candidates:
        results: dict[str, list[dict]] = {r: [] for r in args.rankings}
        for case in rows:
            others = [r for r in fitted_on() if r["_case"] != case["_case"]]
            w = {k: fit(others, k, candidate) for k in KINDS}
            for m in case["main"] + case.get("lateral", []) + case["others"]:
                m["_i"] = instability(m, w.get(_kind(m)), candidate)
            for ranking in args.rankings:
                results[ranking].append(targets(case, ranking))
        m, lat = scores(rows, "main"), scores(rows, "lateral")
        full = {k: fit(fitted_on(), k, candidate) for k in KINDS}
        for ranking, res in results.items():
            top = [v["top"] for v in res if v["top"] is not None]
            order = [v["order"] for v in res if v["order"] is not None]
            steady = [v["alarm_ok"] for v in res if v["alarm_ok"] is not None]
            name = candidate if ranking == "by instability" else f"{candidate}, ranked {ranking}"
            print(f"{name}: targets {sum(top) + sum(order) + sum(steady)} (top {sum(top)}/{len(top)}, order "
                  f"{sum(order)}/{len(order)}, steady without alarm {sum(steady)}/{len(steady)}, alarms in steady "
                  f"landscapes {sum(v['alarms'] for v in res if v['alarms'] is not None)}); main log loss "
                  f"{m['log_loss']:.3f}, AUC {m['auc']:.3f}, ECE {m['ece']:.3f} ({m['n']} segments, {m['moving']} "
                  f"moving); lateral {lat['log_loss']:.3f}, {lat['auc']:.3f}, {lat['ece']:.3f} ({lat['n']}, "
                  f"{lat['moving']}); fitted on all: " + "; ".join(
                      f"{k} " + ("shipped" if w is None else ", ".join(f"{v:.2f}" for v in w))
                      for k, w in full.items()),
                  flush=True)

if __name__ == "__main__":
    main()
