"""The verdict: a calibrated probability of each outcome from the across-divide contrasts."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources

from divides.assess import evidence
from divides.assess.calibration import CLASSES, DEFAULT_THRESHOLD, DecisionModel
from divides.assess.contrasts import MIN_SAMPLES, Contrast

__all__ = ["Verdict", "decide", "NEAR_DIVIDE_METRICS", "CAUTION", "INSUFFICIENT_HELP", "MODEL_FILE",
           "FORWARD_BASES", "FORWARD_MODEL_FILE", "FORWARD_NOISE_CELLS", "forward_agrees", "forward_disagrees",
           "decision_model", "right_share"]

#: The fitted decision models shipped with the package (docs/validation.md says how they were made):
#: near-divide measures only, and near-divide measures with the forward run.
MODEL_FILE = "verdict_model.json"
FORWARD_MODEL_FILE = "verdict_model_forward.json"

#: A forward-run shift smaller than this (cells) points nowhere: a third of the shift of a divide
#: at the stability threshold over the run's horizon (evidence.FORWARD_SCALE_CELLS), set before any fit.
FORWARD_NOISE_CELLS = 0.1

#: Bases of a direction given by the model that reads the forward run.
FORWARD_BASES = ("near-divide and forward run", "forward run")

#: Metrics of the present state of the divide (Forte & Whipple 2018; Scherler & Schwanghart 2020).
NEAR_DIVIDE_METRICS = ("channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")

#: What would give an assessment with too few independent samples enough of them.
INSUFFICIENT_HELP = (
    f"Fewer than {MIN_SAMPLES} independent samples (pairs of channel heads facing each other across the "
    "divide) on a side. What would help: a longer stretch of divide, a finer DEM, or a smaller reference "
    "area / channel threshold (--reference-area, --channel-area), so that more channels head at the divide."
)

#: The caution every verdict carries.
CAUTION = (
    "This is a screening result from a DEM, not a site investigation: verify it in the field, and let "
    "local codes and licensed professionals decide on any hazard, infrastructure or land-use question."
)


@dataclass(frozen=True)
class Verdict:
    """Which way the divide moves, how sure we are, and why.

    Attributes
    ----------
    moves_toward : str
        ``"a"`` or ``"b"`` (the victim side), ``"stable"`` or ``"undetermined"``.
    aggressor : str or None
        The side eroding into the other.
    confidence : float
        The calibrated probability of ``moves_toward`` (0–1); for ``"undetermined"`` the largest
        probability, which fell short of the threshold (0 with insufficient data).
    basis : str
        ``"near-divide"`` (a direction from the present state of the divide), ``"near-divide and
        forward run"``, ``"forward run"`` (near-divide samples too few; the forward run alone),
        ``"none"`` (stable), ``"undetermined"`` or ``"insufficient data"``.
    long_run : str
        Direction χ alone indicates: ``"a"``, ``"b"`` or ``"none"``.
    agreeing, disagreeing : tuple of str
        Near-divide metrics pointing with and against the verdict.
    robustness_share : float or None
        Share of perturbed re-runs that kept ``moves_toward`` (None when not run). Reported beside
        the confidence, never folded into it (that would undo the calibration).
    text : str
        The verdict in plain words (filled in by the assessment).
    reason : str
        Why: ``"near-divide evidence"`` (a direction), ``"balanced"`` (stable), ``"insufficient data"``,
        ``"below the confidence threshold"``, ``"chi only"`` (only χ's long-run tendency would have
        carried the direction, which it never does alone) or ``"lines disagree"`` (the near-divide
        measures and the forward run point opposite ways).
    probabilities : dict or None
        P(toward a), P(toward b), P(stable) from the decision model (None with insufficient data).
    min_confidence : float
        The probability an outcome needed.
    forward_shift_cells : float or None
        The forward run's shift of the divide (model cells over 0.3 response times, positive into b;
        None when it was not run).
    near_divide_probabilities : dict or None
        P(a), P(b), P(stable) from the near-divide measures alone (the metric-only model), reported
        beside the decision whenever the forward run was made and the near-divide samples suffice.
    """

    moves_toward: str
    aggressor: str | None
    confidence: float
    basis: str
    long_run: str
    agreeing: tuple = ()
    disagreeing: tuple = ()
    robustness_share: float | None = None
    text: str = ""
    notes: list = field(default_factory=list)
    reason: str = ""
    probabilities: dict | None = None
    min_confidence: float = DEFAULT_THRESHOLD
    forward_shift_cells: float | None = None
    near_divide_probabilities: dict | None = None


def _other(side: str) -> str:
    return "b" if side == "a" else "a"


@lru_cache(maxsize=2)
def _packaged(forward: bool = False) -> tuple[DecisionModel, dict]:
    name = FORWARD_MODEL_FILE if forward else MODEL_FILE
    doc = json.loads(resources.files("divides.assess").joinpath(name).read_text(encoding="utf-8"))
    return DecisionModel.from_dict(doc), doc


def decision_model(forward: bool = False) -> DecisionModel:
    """A decision model shipped with the package (fitted on the benchmark's training part).

    Parameters
    ----------
    forward : bool
        The model that also reads the forward run (True) or the near-divide measures alone.
    """
    return _packaged(bool(forward))[0]


def right_share(confidence: float, forward: bool = False) -> tuple[float, int] | None:
    """How often held-out model landscapes' verdicts at this confidence were right.

    Returns ``(share, count)`` of the held-out reliability bin of the model (``forward``: the
    one that reads the forward run) the confidence falls in (docs/validation.md), or None when
    that bin held no case.
    """
    bins = _packaged(bool(forward))[1].get("held_out_reliability", [])
    for b in bins:
        if b["lower"] <= confidence < b["upper"] or (confidence >= 1.0 and b["upper"] >= 1.0):
            return (float(b["accuracy"]), int(b["count"])) if b["count"] else None
    return None


def _shift_along(probabilities: dict, shift_cells: float) -> tuple[str | None, float]:
    """The side the near-divide decision favours (None on a tie: neither) and the forward run's shift
    toward it in model cells (``shift_cells`` positive into b; NaN when there is no side or no shift)."""
    pa, pb = probabilities.get("a", 0.0), probabilities.get("b", 0.0)
    if pa == pb or not math.isfinite(shift_cells):
        return None, math.nan
    call = "b" if pb > pa else "a"
    return call, shift_cells * (1.0 if call == "b" else -1.0)


def forward_disagrees(probabilities: dict, shift_cells: float, min_confidence: float) -> bool:
    """True when the near-divide decision points one way at ``min_confidence`` or more while the forward
    run moves the divide at least :data:`FORWARD_NOISE_CELLS` model cells the other way (``shift_cells``
    positive into b): the two lines disagree strongly, and the direction is left undetermined.

    Examples
    --------
    >>> forward_disagrees({"a": 0.1, "b": 0.8, "stable": 0.1}, -0.3, 0.5)
    True
    >>> forward_disagrees({"a": 0.1, "b": 0.8, "stable": 0.1}, -0.05, 0.5)
    False
    """
    call, along = _shift_along(probabilities, shift_cells)
    return call is not None and probabilities[call] >= min_confidence and along <= -FORWARD_NOISE_CELLS


def forward_agrees(probabilities: dict, shift_cells: float) -> bool:
    """True when the forward run moves the divide at least :data:`FORWARD_NOISE_CELLS` model cells
    (``shift_cells``, positive into b) toward the side the near-divide decision favours (neither on a tie).

    Examples
    --------
    >>> p = {"a": 0.2, "b": 0.5, "stable": 0.3}
    >>> forward_agrees(p, 0.3), forward_agrees(p, -0.3), forward_agrees(p, 0.05)
    (True, False, False)
    >>> forward_agrees({"a": 0.3, "b": 0.3, "stable": 0.4}, 0.3)  # a tie favours no side: mirror images agree
    False
    """
    return _shift_along(probabilities, shift_cells)[1] >= FORWARD_NOISE_CELLS


def decide(
    contrasts: list[Contrast],
    *,
    robustness_share: float | None = None,
    same_channel: bool = False,
    min_confidence: float = DEFAULT_THRESHOLD,
    model: DecisionModel | None = None,
    extra: dict | None = None,
    forward_shift: float | None = None,
    forward_in_decision: bool = False,
    near_model: DecisionModel | None = None,
) -> Verdict:
    """The calibrated verdict.

    Rule
    ----
    1. No near-divide contrast with enough independent samples (and a decision that does
       not read the forward run): ``"undetermined"``, reason ``"insufficient data"`` (no
       evidence is not evidence of stability).
    2. Otherwise a decision model (:mod:`divides.assess.calibration`, fitted on the
       training part of the model-landscape benchmark; docs/validation.md) turns the
       evidence features (:func:`divides.assess.evidence.features`) into P(toward a),
       P(toward b) and P(stable). By default the model reads the near-divide measures
       alone; with ``forward_in_decision`` it also reads the forward run
       (:func:`divides.assess.evidence.forward_features`), and without near-divide
       samples the forward run then speaks alone, through the same calibrated model.
       (The default was chosen on the benchmark's training part: reading the forward
       run gave more right directions but also more wrong ones; docs/validation.md.)
    3. The most probable outcome is returned when its probability reaches
       ``min_confidence``; otherwise ``"undetermined"``. ``confidence`` is that
       probability.
    4. χ alone never makes a direction (Forte & Whipple 2018; Whipple et al. 2017: steady
       divides under uplift, rock or climate contrasts are lopsided in χ): a direction must
       also reach ``min_confidence`` with χ's feature set to 0, else the verdict is
       ``"undetermined"`` with reason ``"chi only"``. χ's own direction is reported as the
       long-run tendency.
    5. Whenever the forward run was made, the two lines disagreeing strongly leans to
       ``"undetermined"`` (reason ``"lines disagree"``): the near-divide measures alone give
       one direction at ``min_confidence`` while the forward run moves the divide at least
       :data:`FORWARD_NOISE_CELLS` the other way.

    Parameters
    ----------
    contrasts : list of Contrast
    robustness_share : float, optional
        Share of robustness re-runs that kept the verdict (reported, not folded into the confidence).
    same_channel : bool
        Channel elevation and hillslope relief are read at the same cells (kept for callers;
        the model sees both and was fitted with them mirrored where they are).
    min_confidence : float
        Probability an outcome needs, in (1/3, 1] (default 0.8).
    model : DecisionModel, optional
        Default: the packaged model (:func:`decision_model`; the one that reads the forward
        run when ``forward_in_decision``).
    extra : dict, optional
        Further features by name, signed toward b, for a model that reads them.
    forward_shift : float, optional
        The forward run's shift of the divide in model cells, positive into b
        (:func:`divides.model.forward_run.forward_shift`); None: not run.
    forward_in_decision : bool
        The calibrated model reads the forward run (rule 2); otherwise the forward run only
        reports and can veto (rule 5).
    near_model : DecisionModel, optional
        The near-divide-only model of rule 5 (default: the packaged one).
    """
    from divides.assess.calibration import decide as rule

    by_name = {c.metric: c for c in contrasts}
    chi = by_name.get("chi")
    long_run = chi.moves_toward if chi is not None else "none"
    near_ok = evidence.sufficient(contrasts)
    forward = forward_shift is not None and math.isfinite(float(forward_shift))
    reads_forward = forward and forward_in_decision
    if not near_ok and not reads_forward:
        return Verdict("undetermined", None, 0.0, "insufficient data", long_run, robustness_share=robustness_share,
                       reason="insufficient data", min_confidence=float(min_confidence),
                       forward_shift_cells=float(forward_shift) if forward else None)
    feats = evidence.features(contrasts) if near_ok else {k: 0.0 for k in evidence.FEATURES}
    near_probs = None
    if forward:
        feats.update(evidence.forward_features(float(forward_shift), near_ok))
        if near_ok and reads_forward:  # otherwise the deciding model is the near-divide one (below)
            near_model = decision_model() if near_model is None else near_model
            near_probs = dict(zip(CLASSES, (round(float(v), 4) for v in near_model.probabilities(feats)[0])))
    feats.update(extra or {})
    model = decision_model(reads_forward) if model is None else model
    decision = rule(model.probabilities(feats), threshold=min_confidence)[0]
    probs = {k: round(v, 4) for k, v in decision.probabilities.items()}
    if forward and near_ok and not reads_forward:
        near_probs = dict(probs)
    toward, confidence = decision.outcome, decision.probability
    reason = {"a": "near-divide evidence", "b": "near-divide evidence", "stable": "balanced"}.get(
        toward, "below the confidence threshold")
    if toward in ("a", "b") and "z_chi" in model.features:
        without = rule(model.probabilities({**feats, "z_chi": 0.0}), threshold=min_confidence)[0]
        if without.outcome != toward:
            toward, reason = "undetermined", "chi only"
    if near_probs is not None and forward_disagrees(near_probs, float(forward_shift), min_confidence):
        toward, reason = "undetermined", "lines disagree"
    basis = {"a": "near-divide", "b": "near-divide", "stable": "none"}.get(toward, "undetermined")
    if toward in ("a", "b") and reads_forward:
        basis = FORWARD_BASES[0] if near_ok else FORWARD_BASES[1]
        reason = "near-divide evidence and the forward run" if near_ok else \
            "forward run (too few near-divide samples)"
    agreeing = disagreeing = ()
    if toward in ("a", "b"):
        near = [c for c in contrasts if c.metric in evidence.NEAR_DIVIDE]
        agreeing = tuple(c.metric for c in near if c.moves_toward == toward)
        disagreeing = tuple(c.metric for c in near if c.moves_toward == _other(toward))
    aggressor = _other(toward) if toward in ("a", "b") else None
    return Verdict(toward, aggressor, round(float(confidence), 3), basis, long_run, agreeing, disagreeing,
                   robustness_share, reason=reason, probabilities=probs, min_confidence=float(min_confidence),
                   forward_shift_cells=float(forward_shift) if forward else None,
                   near_divide_probabilities=near_probs)
