"""The verdict: combining across-divide contrasts into a direction and a confidence."""

from __future__ import annotations

from dataclasses import dataclass, field

from divides.assess.contrasts import MIN_SAMPLES, Contrast

__all__ = ["Verdict", "decide", "NEAR_DIVIDE_METRICS", "CHI_ONLY_SHARE", "CAUTION", "INSUFFICIENT_HELP"]

#: Metrics of the present state of the divide (Forte & Whipple 2018; Scherler & Schwanghart 2020).
NEAR_DIVIDE_METRICS = ("channel_elevation", "hillslope_gradient", "local_relief", "hillslope_relief")

#: χ alone must differ by at least this share of its mean to call a direction: on its own it is
#: the weaker indicator (it depends on θ, base level and uplift/erodibility patterns; Forte &
#: Whipple 2018), and small χ contrasts are common across divides at steady state.
CHI_ONLY_SHARE = 0.10

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
        0–1; see :func:`decide` for how it is built.
    basis : str
        ``"near-divide"`` (present motion), ``"chi"`` (long-run tendency only),
        ``"none"`` (stable) or ``"conflict"``.
    long_run : str
        Direction χ alone indicates: ``"a"``, ``"b"`` or ``"none"``.
    agreeing, disagreeing : tuple of str
        Near-divide metrics pointing with and against the verdict.
    robustness_share : float or None
        Share of perturbed re-runs that kept ``moves_toward`` (None when not run).
    text : str
        The verdict in plain words (filled in by the assessment).
    reason : str
        Why: ``"near-divide evidence"``, ``"chi only"``, ``"balanced"`` (stable),
        ``"conflicting evidence"``, ``"insufficient data"`` or ``"inconclusive"``
        (nothing significant, but intervals too wide to show balance).
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


def _other(side: str) -> str:
    return "b" if side == "a" else "a"


def _vote_groups(same_channel: bool) -> list[tuple[str, ...]]:
    """Near-divide metrics grouped into independent votes.

    When channel elevation is read at the channel threshold itself, it and the
    hillslope relief (divide elevation minus the same channel cell) are one
    measurement seen twice — their differences across the divide are equal
    and opposite point by point — so they cast a single vote.
    """
    if same_channel:
        return [("channel_elevation", "hillslope_relief"), ("hillslope_gradient",), ("local_relief",)]
    return [(name,) for name in NEAR_DIVIDE_METRICS]


def decide(
    contrasts: list[Contrast], *, robustness_share: float | None = None, same_channel: bool = False
) -> Verdict:
    """Combine the contrasts by the documented rule.

    Rule
    ----
    1. Near-divide metrics (channel elevation at the reference area, mean
       upstream gradient, local relief, hillslope relief) speak for the
       present motion; χ for the long-run tendency (Forte & Whipple 2018).
    2. If the significant near-divide metrics all point one way, or one way
       by at least three to one, that is the direction. Any closer split is
       ``"undetermined"``.
    3. If no near-divide metric is significant but χ is, and by at least
       :data:`CHI_ONLY_SHARE` of its mean, the direction is χ's, flagged as a
       long-run tendency only, with a low confidence.
    4. ``"stable"`` needs positive evidence of balance: every near-divide
       metric has enough samples and a 95 % interval inside ± its practical
       threshold (:data:`divides.assess.contrasts.PRACTICAL_SHARE` of its size),
       so no difference that would count as motion is compatible with the
       data (an equivalence test). No evidence is not balance: when the
       near-divide contrasts lack samples the verdict is ``"undetermined"``
       with reason ``"insufficient data"``; when nothing is significant but the
       intervals are too wide, ``"undetermined"`` with reason ``"inconclusive"``.

    Metrics that measure the same thing vote once (see ``same_channel``).

    Confidence
    ----------
    Direction from near-divide metrics: 0.35 + w per agreeing vote − w per
    disagreeing one, with w = 0.6 / (number of votes) (0.15 for four
    independent metrics, 0.2 for three), +0.05 if χ agrees, −0.15 if χ disagrees;
    χ alone: 0.4; stable: 0.7; undetermined: 0. (A rule of thumb, not a calibrated
    probability: a score.) The result, kept in 0–0.97,
    is multiplied by the share of robustness re-runs that kept the same
    verdict (by 0.8 when robustness was not checked), so a verdict that a
    plausible change of input overturns cannot keep a high confidence.
    """
    by_name = {c.metric: c for c in contrasts}
    chi = by_name.get("chi")
    long_run = chi.moves_toward if chi is not None else "none"
    votes = {"a": [], "b": []}  # lists of the metric groups voting each way
    groups = _vote_groups(same_channel)
    for group in groups:
        ways = {by_name[n].moves_toward for n in group if n in by_name} - {"none"}
        if len(ways) == 1:  # members that point agree (a split group abstains)
            way = ways.pop()
            votes[way].append(tuple(n for n in group if by_name[n].moves_toward == way))
    weight = 0.6 / len(groups)
    n_a, n_b = len(votes["a"]), len(votes["b"])
    if n_a or n_b:
        major = "a" if n_a > n_b else "b"
        n_major, n_minor = max(n_a, n_b), min(n_a, n_b)
        if n_minor == 0 or n_major >= 3 * n_minor:
            score = 0.35 + weight * n_major - weight * n_minor
            if long_run == major:
                score += 0.05
            elif long_run == _other(major):
                score -= 0.15
            toward, basis = major, "near-divide"
            agreeing = tuple(n for g in votes[major] for n in g)
            disagreeing = tuple(n for g in votes[_other(major)] for n in g)
        else:
            toward, basis, score = "undetermined", "conflict", 0.0
            agreeing = tuple(n for g in votes["a"] for n in g)
            disagreeing = tuple(n for g in votes["b"] for n in g)
    elif long_run in ("a", "b") and abs(chi.difference) >= CHI_ONLY_SHARE * 0.5 * (abs(chi.a) + abs(chi.b)):
        toward, basis, score, agreeing, disagreeing = long_run, "chi", 0.4, (), ()
    else:
        toward, score, agreeing, disagreeing = "undetermined", 0.0, (), ()
        near = [by_name[n] for g in groups for n in g if n in by_name]
        if not near or not any(c.sufficient for c in near):
            basis = reason = "insufficient data"
        elif all(c.balanced for c in near):
            toward, basis, reason, score = "stable", "none", "balanced", 0.7
        else:
            basis = reason = "inconclusive"
    if toward in ("a", "b"):
        reason = "near-divide evidence" if basis == "near-divide" else "chi only"
    elif basis == "conflict":
        reason = "conflicting evidence"
    score = min(max(score, 0.0), 0.97)
    score *= 0.8 if robustness_share is None else robustness_share
    aggressor = _other(toward) if toward in ("a", "b") else None
    return Verdict(toward, aggressor, round(float(score), 3), basis, long_run, agreeing, disagreeing,
                   robustness_share, reason=reason)
