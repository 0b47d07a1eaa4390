"""How likely a divide segment moves: the screening's ranking score, the probability of motion
(:func:`motion_probability`, calibrated on the regional benchmark's training cases) and the instability it reports,
the score never above that probability (:func:`bounded_instability`).

Both read the calibrated decision's probabilities and, by default, the landscape evidence of
:func:`divides.assess.screen.screen` (the two landscape runs' shifts, the hilltop contrast, the transience of the
two sides' basins and the neighbours' scores); docs/methods.md §7b, docs/validation.md (*Regional screening*).
"""

from __future__ import annotations

import math

__all__ = ["instability_of", "bounded_instability", "evidence_features",
           "motion_features", "motion_probability", "run_shifts",
           "run_size", "finite_or_none", "INSTABILITY_SCALING", "INSTABILITY_EVIDENCE", "MOTION_PROBABILITY",
           "RUNS_AGREE_CELLS", "MAIN_ONE_U_CELLS", "TRANSIENT_BASIN", "TRANSIENT_SPREADS", "RUN_SIZE_CAP",
           "TOLD_ERROR_CAP_M", "LATERAL_HILLS_AGAINST_MAX", "LIKELY_MOTION"]

#: A probability of motion from which a segment is read as likely to move (under one half it more likely does not):
#: the report draws its direction as motion, and a lateral divide keeps its direction only from here (round 80).
LIKELY_MOTION = 0.5

#: Platt scaling (Platt 1999) of the decision's probability of motion, P(a) + P(b), to the measured truth
#: of the regional benchmark, one per kind of divide (:mod:`divides.assess.divide_kind`):
#: instability = 1 / (1 + exp(-(alpha + beta logit p))). ``main``: segments between outlet basins that
#: drain apart, truth per stretch of the main divide (a segment moves when at least 70 % of it lies in
#: stretches moving 2 cells per response time or more); ``lateral``: between outlet basins that drain the
#: same way, truth from the area the two basins exchange. Fitted on the 316 training cases of round 58 with
#: 120-cell judged stretches, no DEM error (6992 main segments, 2555 moving; 9293 lateral, 518 moving; round 60,
#: docs/validation.md, *Regional screening*); refit with ``tests/benchmarks/bench_regional.py --fit`` whenever the
#: decision model or the judged stretch changes. Read only without the landscape evidence (``forward_run=False``).
INSTABILITY_SCALING: dict[str, tuple[float, float]] = {"main": (-4.29, 2.06), "lateral": (-3.79, 1.22)}

#: The instability with the landscape evidence (the default of :func:`divides.assess.screen.screen`): a logistic
#: model per kind of divide, instability = 1 / (1 + exp(-(alpha + beta logit p + gamma_h h + gamma_r r))),
#: p = P(a) + P(b); h the hilltop-curvature contrast signed toward the side the decision favours
#: (:func:`divides.assess.hilltops.hilltop_contrast`; 0 when unmeasured; since round 30 of curvature fitted over a
#: window as wide as the DEM error's correlation length, :func:`divides.assess.hilltops.hilltop_curvature`, which on
#: 177 training cases gave 203 targets against 199 without error and 184 against 175 with 5 m of it, alarms 3
#: against 5 there; coefficients as fitted on the 5-point stencil); r = 1 when both landscape runs under the
#: steady balance, one with one uplift rate and one with one rate per outlet basin, move the segment's divide at
#: least :data:`RUNS_AGREE_CELLS` model cells toward that side (on main divides the first at least
#: :data:`MAIN_ONE_U_CELLS`, round 38), or, on a main divide whose aggressor's basin is
#: transient (:data:`TRANSIENT_BASIN`, :data:`TRANSIENT_SPREADS`), the first does and the second does not move it as
#: far the other way; else 0 (also when either run did not measure it). The coefficients were fitted on the regional
#: benchmark's version-3 training cases with r read from the first run alone at 0.1 cell; r of both runs was chosen
#: on 57 training cases (round 11), kept on 153 against reading the per-basin run only against contradiction
#: everywhere (rounds 17 and 21), and widened to transient aggressors on 177 (rounds 22 and 25; rules written
#: beforehand, docs/validation.md, *Regional screening*). On lateral divides the hilltop term is left out (gamma_h
#: fitted 8.07, set to 0 in round 23 on the 177 cases: 199 targets against 190, 3 alarms in steady landscapes against
#: 13, lateral log loss 0.157 against 0.141): at steady state the side with the faster uplift has the more convex
#: hilltops, so h reads a steady contrast as motion. Refitted on these features in round 35 (not adopted), the run
#: term weakens (main gamma_r 4.85) and segments neither run moves score >= 0.5 on their contrasts alone: main log
#: loss 0.14 against 0.44 but 45-87 alarms in steady landscapes against 3. A score in [0, 1] that ranks segments by
#: how likely they move, not a calibrated probability: its reliability is in docs/validation.md.
INSTABILITY_EVIDENCE: dict[str, tuple[float, float, float, float]] = {"main": (-27.16, 2.70, 16.06, 22.42),
                                                                      "lateral": (-3.89, 1.02, 0.0, 0.61)}

#: Model cells both landscape runs must move a divide toward the favoured side for r = 1 in
#: :data:`INSTABILITY_EVIDENCE`: a divide moving 2 cells per response time (the benchmark's "moving")
#: covers 0.6 cell over the runs' 0.3 response times. Chosen against 0.25 on training cases (round 11).
RUNS_AGREE_CELLS = 0.5

#: On main divides r asks the one-uplift-rate run for a longer shift toward the favoured side, in both of its branches
#: (:func:`evidence_features`): in steady contrast landscapes it moves segments by up to about a cell where the
#: basins straddle the contrast, and with the per-basin run doing so too, or the aggressor's basin read as transient,
#: that was enough for an alarm. Chosen against 0.5 (round 36's default) and 1 cell in round 38 (177 training cases,
#: rule written beforehand; docs/validation.md, *Regional screening*): 215, 209 and 197 targets under 0, 1 and 5 m of
#: DEM error against 214, 206 and 194, alarms in steady landscapes 1, 1 and 0 against 3, 3 and 3; main log loss 0.538
#: against 0.435 under 0 m (the score is not a calibrated probability).
MAIN_ONE_U_CELLS = 0.75

#: A basin is transient for :data:`INSTABILITY_EVIDENCE`'s r when the absolute value of its transience
#: (:func:`divides.model.transience.basin_transience`, ln of its lower over its upper channels' erosion rate) is at
#: least this: where the aggressor's basin is transient, the run with one rate per outlet basin, which takes a fall
#: of base level for a steady contrast, need only not contradict the one-rate run. Chosen against 0.2 and 0.4 and
#: against the signed transience or the aggressor's minus the victim's on 177 training cases by a rule written
#: beforehand (docs/validation.md, *Regional screening*, round 22): 190 targets against 189, main log loss 0.400
#: against 0.549.
TRANSIENT_BASIN = 0.1

#: ... and at least this many times its standard deviation over draws of the DEM error model
#: (:func:`divides.model.transience.transience_spread`, the screening's ``dem_error_m`` and ``dem_error_length_m``):
#: on its own |T| >= 0.1 reads 17-93 % of the basins of the regional benchmark's steady landscapes, and more under
#: DEM error, as transient (tests/benchmarks/bench_transience_noise.py). Round 25 (rule written beforehand, 177
#: training cases): 199 targets as before, main log loss 0.426 against 0.400; steady basins read transient under
#: 1 m of correlated error 5 % against 44 % on a small ridge, and fewer in each of master seed 0's steady cases.
TRANSIENT_SPREADS = 2.0

#: With the landscape evidence, a lateral segment whose hilltops contradict the favoured side (h < 0 in
#: :func:`evidence_features`: the side it would move into has the more convex hilltops) scores at most this, so it
#: raises no alarm. At steady state a contrast of erodibility leaves the erosion rate, hence the hilltop curvature,
#: equal on both sides, while the runs, which know no erodibility, move such divides. Round 47 (rule written before its
#: figures, after two such alarms on a fresh draw, disclosed; 366 training cases): steady landscapes without an alarm
#: 182, 182 and 185 of 186 under 0, 1 and 5 m of DEM error against 181, 181 and 185, lateral log loss unchanged (0.159,
#: 0.163, 0.176); the hilltops' term fitted instead (g min(h, 0), g = 3.3) removed none. Hilltops that agree are not
#: read on lateral divides (round 23: in a steady uplift contrast they agree with a motion that is not there).
LATERAL_HILLS_AGAINST_MAX = 0.49

#: The probability of motion with the landscape evidence (:func:`motion_probability`): a logistic model per kind of
#: divide, P = 1 / (1 + exp(-(c0 + c1 logit p + c2 h + c3 r + c4 s + c5 u [+ c6 n] + c7 e))), with p, h and r as in
#: :data:`INSTABILITY_EVIDENCE` (:func:`evidence_features`), s the larger |shift| of the two landscape runs capped at
#: :data:`RUN_SIZE_CAP` model cells (0 when neither measured the segment), u = 1 when neither did, on main divides
#: n = 1 when a main segment within reach scores at least the ranking's tier (``neighbour_instability``,
#: :func:`divides.assess.screen.rank_key`), and e the DEM error the screening is told (``dem_error_m``), read from 0 to
#: :data:`TOLD_ERROR_CAP_M`. Fitted by maximum likelihood (Gaussian prior of sd 10 on all but c0) on every main and
#: lateral segment in a moving or still stretch of the 316 training cases of round 58, screened with 120-cell judged
#: stretches (:data:`divides.assess.screen.MIN_JUDGED_CELLS`), under 0, 1 and 5 m of DEM error (told 1, 1 and 5 m;
#: 21 207 main readings, 7726 moving; 27 860 lateral, 1541 moving; round 59). Round 42 (rules written before their
#: figures; docs/validation.md, *Regional screening*) chose the features without e over the instability's logit
#: alone and that logit with s, u and n; round 46 added e, since one fit read low under 5 m of error. Each case
#: scored by coefficients fitted without it: main log loss 0.087, 0.094 and 0.125 and calibration error 0.006, 0.008
#: and 0.006 under 0, 1 and 5 m (the instability's 0.510, 0.569, 1.170 and 0.069, 0.075, 0.141); lateral log loss
#: 0.125, 0.121 and 0.145. On main divides c4 < 0: at a given p, h and r a larger shift more often comes from a
#: steady contrast that the per-basin run misreads (round 37). c7 > 0: noisier evidence of the same size has more
#: motion behind it. Calibrated to the benchmark's mix of landscapes (36 % of main segments moving): where moving
#: divides are rarer, it reads high.
MOTION_PROBABILITY: dict[str, tuple[float, ...]] = {
    "main": (-5.2, 1.967, 13.089, 3.456, -1.056, 0.066, 3.377, 0.221),
    "lateral": (-5.224, 1.151, 3.199, 2.431, 0.95, -2.544, 0.148),
}

#: The landscape runs' shift is read up to this many model cells by :data:`MOTION_PROBABILITY` (a moving divide
#: covers about 0.6 cell over the runs' 0.3 response times; beyond a few cells the shift says no more).
RUN_SIZE_CAP = 5.0

#: The DEM error a screening is told is read up to this many metres by :data:`MOTION_PROBABILITY`: the most its
#: training cases were told; a larger error is outside what it was fitted on.
TOLD_ERROR_CAP_M = 5.0


def instability_of(probabilities: dict | None, kind: str = "main", evidence: dict | None = None) -> float | None:
    """How likely a segment moves, from the decision's probabilities and the landscape evidence.

    P(a) + P(b) of the calibrated decision (fitted on whole divides between two sides) rescaled to
    the measured truth of divide segments of the same kind (``"main"`` or ``"lateral"``,
    :mod:`divides.assess.divide_kind`) in regional model landscapes: by :data:`INSTABILITY_SCALING`
    alone (a calibrated probability), or, with ``evidence`` (``forward_shift_cells`` and
    ``forward_shift_basin_cells``, model cells into b, and ``hilltop_contrast``, positive when side a
    is the more convex; each None or NaN when not measured), by the score of
    :data:`INSTABILITY_EVIDENCE`. None (unknown) when the decision abstained for insufficient data.

    Examples
    --------
    >>> round(instability_of({"a": 0.45, "b": 0.45, "stable": 0.1}), 2)  # -4.29 + 2.06 logit 0.9 = 0.236
    0.56
    >>> agreeing = {"forward_shift_cells": 0.8, "forward_shift_basin_cells": 0.6, "hilltop_contrast": 0.2}
    >>> round(instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "main", agreeing), 2)  # all toward b
    0.99
    >>> one_run = {"forward_shift_cells": 0.8, "forward_shift_basin_cells": -0.3, "hilltop_contrast": 0.2}
    >>> instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "main", one_run) < 0.01  # the runs disagree
    True
    >>> short = {**agreeing, "forward_shift_cells": 0.6}  # the one-U run 0.6 cell: enough on lateral divides only
    >>> instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "main", short) < 0.01
    True
    >>> round(instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "lateral", short), 2)  # logit 0.9 = 2.20
    0.26
    >>> fall = {**one_run, "forward_shift_basin_cells": 0.1, "transience_a": -0.4, "transience_sd_a": 0.1}
    >>> round(instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "main", fall), 2)
    0.99
    >>> instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "main", {**fall, "transience_a": 0.05}) < 0.01
    True
    >>> instability_of({"a": 0.05, "b": 0.85, "stable": 0.1}, "main", {**fall, "transience_sd_a": 0.3}) < 0.01
    True
    >>> confident = {"a": 0.01, "b": 0.98, "stable": 0.01}  # both runs toward b: -3.89 + 1.02 x 4.60 + 0.61 = 1.41
    >>> round(instability_of(confident, "lateral", agreeing), 2)
    0.8
    >>> instability_of(confident, "lateral", {**agreeing, "hilltop_contrast": -0.05})  # hilltops against (round 47)
    0.49
    >>> instability_of(None) is None
    True
    """
    if probabilities is None:
        return None
    logit, hill, agrees = evidence_features(probabilities, evidence or {}, kind)
    if evidence is None:
        alpha, beta = INSTABILITY_SCALING[kind]
        t = alpha + beta * logit
    else:
        alpha, beta, g_hill, g_run = INSTABILITY_EVIDENCE[kind]
        t = alpha + beta * logit + g_hill * hill + g_run * agrees
    score = float(1.0 / (1.0 + math.exp(-t))) if t > -700 else 0.0
    return score if evidence is None else _hills_against(score, kind, hill)


def _hills_against(value: float, kind: str, hill: float) -> float:
    """``value`` capped at :data:`LATERAL_HILLS_AGAINST_MAX` on a lateral divide whose hilltops contradict the
    favoured side (``hill`` < 0, :func:`evidence_features`; rounds 47 and 49)."""
    return min(value, LATERAL_HILLS_AGAINST_MAX) if kind == "lateral" and hill < 0.0 else value


def evidence_features(probabilities: dict, evidence: dict, kind: str = "main", *,
                      one_u_cells: float | None = None) -> tuple[float, float, float]:
    """What :func:`instability_of` reads: logit(P(a) + P(b)) (P clipped to [1e-4, 1 - 1e-4]), the hilltop
    contrast signed toward the side the decision favours (0 on a tie or unmeasured), and r: 1.0 when the run with
    one uplift rate moves the divide at least :data:`RUNS_AGREE_CELLS` toward that side (:data:`MAIN_ONE_U_CELLS` on
    a ``"main"`` divide; ``one_u_cells`` when given, for rescoring other thresholds) and the run with one rate
    per outlet basin either does so too or, on a ``"main"`` divide whose aggressor's basin is transient
    (:func:`_aggressor_transient`), does not move it as far the other way; else 0.0 (also when a run is
    unmeasured).

    ``evidence`` holds ``hilltop_contrast``, ``forward_shift_cells`` (the run with one uplift rate),
    ``forward_shift_basin_cells`` (one rate per outlet basin), model cells into b, ``transience_a`` and
    ``transience_b`` (:func:`divides.model.transience.basin_transience` of each side's basin) and
    ``transience_sd_a`` and ``transience_sd_b`` (their spread under the DEM error model,
    :func:`divides.model.transience.transience_spread`); None or NaN when not measured.
    """
    p = min(max(float(probabilities.get("a", 0.0) + probabilities.get("b", 0.0)), 1e-4), 1.0 - 1e-4)
    favoured = _favoured(probabilities)
    hill = finite_or_none(evidence.get("hilltop_contrast")) or 0.0
    one_u, per_basin = (None if s is None else favoured * s for s in run_shifts(evidence))
    if one_u_cells is None:
        one_u_cells = MAIN_ONE_U_CELLS if kind == "main" else RUNS_AGREE_CELLS
    agrees = favoured != 0 and one_u is not None and per_basin is not None and one_u >= one_u_cells and (
        per_basin >= RUNS_AGREE_CELLS or (kind == "main" and per_basin > -RUNS_AGREE_CELLS
                                          and _aggressor_transient(favoured, evidence)))
    return math.log(p / (1.0 - p)), favoured * hill, float(agrees)


def _aggressor_transient(favoured: float, evidence: dict) -> bool:
    """The basin on the side away from the favoured one (the aggressor) is out of steady state: the absolute
    value of its ``transience_a`` or ``transience_b`` is at least :data:`TRANSIENT_BASIN` and at least
    :data:`TRANSIENT_SPREADS` times its spread under the DEM error model (``transience_sd_a`` or ``_b``; False
    when either is unmeasured)."""
    side = "a" if favoured > 0 else "b"
    t, sd = finite_or_none(evidence.get(f"transience_{side}")), finite_or_none(evidence.get(f"transience_sd_{side}"))
    return t is not None and sd is not None and abs(t) >= max(TRANSIENT_BASIN, TRANSIENT_SPREADS * sd)


def run_size(evidence: dict) -> float | None:
    """The larger |shift| of the two landscape runs (model cells; None when neither measured the segment)."""
    return max((abs(s) for s in run_shifts(evidence) if s is not None), default=None)


def run_shifts(evidence: dict) -> tuple[float | None, float | None]:
    """The one-uplift-rate and per-basin runs' shifts of a segment (model cells into b; None when unmeasured)."""
    return (finite_or_none(evidence.get("forward_shift_cells")),
            finite_or_none(evidence.get("forward_shift_basin_cells")))


def _favoured(probabilities: dict) -> float:
    """+1.0 when the decision favours motion toward b, -1.0 toward a, 0.0 on a tie."""
    pa, pb = probabilities.get("a", 0.0), probabilities.get("b", 0.0)
    return float((pb > pa) - (pb < pa))


def finite_or_none(v: float | None) -> float | None:
    """``v`` as a float, or None when it is None or not finite."""
    return None if v is None or not math.isfinite(v) else float(v)


def motion_features(kind: str, probabilities: dict, evidence: dict, *, beside: bool = False,
                    dem_error_m: float = 1.0) -> tuple[float, ...]:
    """What :func:`motion_probability` reads (:data:`MOTION_PROBABILITY`, without the intercept): logit p, h and r
    (:func:`evidence_features`), s, u, on a ``"main"`` divide n (``beside``: a main segment within reach scores at
    least the ranking's tier), and e (``dem_error_m``, the DEM error the screening is told, read from 0 to
    :data:`TOLD_ERROR_CAP_M`).

    Examples
    --------
    >>> ev = {"forward_shift_cells": -7.0, "forward_shift_basin_cells": None, "hilltop_contrast": 0.2}
    >>> [round(v, 3) for v in motion_features("main", {"a": 0.5, "b": 0.0, "stable": 0.5}, ev, beside=True)]
    [0.0, -0.2, 0.0, 5.0, 0.0, 1.0, 1.0]
    >>> [round(v, 3) for v in motion_features("lateral", {"a": 0.0, "b": 0.5, "stable": 0.5}, {}, dem_error_m=9.0)]
    [0.0, 0.0, 0.0, 0.0, 1.0, 5.0]
    """
    logit, hill, agrees = evidence_features(probabilities, evidence, kind)
    size = run_size(evidence)
    runs = (0.0 if size is None else min(size, RUN_SIZE_CAP), float(size is None))
    told = min(max(float(dem_error_m), 0.0), TOLD_ERROR_CAP_M)
    return (logit, hill, agrees, *runs, *((float(beside),) if kind == "main" else ()), told)


def bounded_instability(score: float | None, probability: float | None) -> float | None:
    """The instability a screening reports: the ranking score (:func:`instability_of`), never above the segment's
    probability of motion (:func:`motion_probability`), so that an instability of 0.5 or more, the alarm's bound,
    means the segment more likely moves than not by both. Unknown (None) stays unknown; without a probability the
    score is returned.

    Round 57 (rule written beforehand; docs/validation.md, *Regional screening*): on 316 training cases it removed
    the alarm of one steady landscape in 162 under 0 m and under 1 m of DEM error and none under 5 m, and no alarm of
    a main segment in a moving stretch. The ranking reads the score, which the screening reports as
    ``ranking_score``.

    Examples
    --------
    >>> bounded_instability(0.81, 0.54), bounded_instability(0.3, 0.9), bounded_instability(None, 0.9)
    (0.54, 0.3, None)
    >>> bounded_instability(0.7, None)
    0.7
    """
    if score is None or probability is None:
        return score
    return min(score, probability)


def motion_probability(probabilities: dict | None, kind: str = "main", evidence: dict | None = None, *,
                       beside: bool = False, dem_error_m: float = 1.0) -> float | None:
    """The probability that a divide segment moves, calibrated on the regional benchmark's training cases.

    With the landscape ``evidence`` (as for :func:`instability_of`) the model of :data:`MOTION_PROBABILITY` for the
    segment's ``kind`` (``beside`` and ``dem_error_m`` as for :func:`motion_features`), on a lateral divide whose
    hilltops contradict the direction at most :data:`LATERAL_HILLS_AGAINST_MAX` (round 49: on the training cases
    its lateral log loss and calibration error fell slightly under every DEM error); without it the instability
    itself, which is then the decision's P(a) + P(b) calibrated by :data:`INSTABILITY_SCALING`. None (unknown) when
    the decision abstained for insufficient data.

    Examples
    --------
    >>> p = {"a": 0.0, "b": 0.5, "stable": 0.5}  # logit p = 0; no run measured the segment; told 1 m
    >>> round(motion_probability(p, "main", {}), 4)  # 1 / (1 + exp(5.2 - 0.066 - 0.221)) by hand
    0.0073
    >>> motion_probability(p, "main") == instability_of(p, "main")
    True
    >>> runs = {"forward_shift_cells": 3.0, "forward_shift_basin_cells": 3.0}  # both runs 3 cells toward b
    >>> # 1 / (1 + exp(5.224 - 1.151 ln 99 - 2.431 - 0.95 * 3 - 0.148)) by hand
    >>> round(motion_probability({"a": 0.01, "b": 0.98, "stable": 0.01}, "lateral", runs), 3)
    0.996
    >>> motion_probability({"a": 0.01, "b": 0.98, "stable": 0.01}, "lateral", {**runs, "hilltop_contrast": -0.05})
    0.49
    >>> motion_probability(None) is None
    True
    """
    if probabilities is None:
        return None
    if evidence is None:
        return instability_of(probabilities, kind)
    c = MOTION_PROBABILITY[kind]
    features = motion_features(kind, probabilities, evidence, beside=beside, dem_error_m=dem_error_m)
    t = c[0] + sum(w * x for w, x in zip(c[1:], features))
    return _hills_against(float(1.0 / (1.0 + math.exp(-t))) if t > -700 else 0.0, kind, features[1])
