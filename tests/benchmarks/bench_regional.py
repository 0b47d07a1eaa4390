"""Regional screening against measured truth per stretch of the main divide (run by hand, not a test).

    python tests/benchmarks/bench_regional.py [--n 24] [--seed 0] [--split training|held-out|all]
                                              [--generate-only [--hide-truth]] [--json FILE] [--fit] [--markdown]
                                              [--no-forward-run] [--dem-error SIGMA [--dem-error-cells L]
                                              [--screen-assumes-default]] [--half-cell] [--auto-channel-area]
                                              [--channel-area-rule S|CAP0.2|CLIP0.2|CLIP0.5]

Builds (or reads from ~/.cache/divides/regional) the regional cases of
divides.model.regional_benchmark one at a time, screens each DEM with the
shipped decision model and prints the targets of issue 14 per case and per
split (docs/validation.md, *Regional screening*). Re-run it after any change
to the decision model: it is the one command behind the figures there.
Each DEM is screened with screening's landscape evidence (the steady-balance
run and the hilltop curvature; --no-forward-run: the near-divide contrasts
alone); --fit prints INSTABILITY_EVIDENCE and the P-only INSTABILITY_SCALING.
--dem-error screens each observed surface plus one field of correlated DEM error (σ in m, exponential
covariance over L cells, default 3; RegionalCase.dem), the truth staying that of the surface without it;
screening is told the error (dem_error_m, dem_error_length_m) unless --screen-assumes-default.
--half-cell screens each DEM resampled half a cell off its grid (:func:`half_cell`): the same landscape sampled at
other points, as a reprojection or a resampling of a real DEM samples it; the truth stays that of the model grid.
--auto-channel-area screens with the channel area screening reads from the DEM by default (slope–area data) instead of
the validation's fixed :data:`CHANNEL_CELLS`; --channel-area-rule with round 64's candidate rule for that default.
"""

from __future__ import annotations

import argparse
import json
import time

from divides.assess.divide_kind import KINDS
from divides.assess.screen import INSTABILITY_SCALING, evidence_features
from divides.model.regional_benchmark import raises_alarm

#: Channel threshold of the validation in cells: the default fallback (about 350 cells here) left six
#: basins above the minimum area and no judged main-divide segment in training case 1. Condition A
#: (--auto-channel-area) reads the screening's own default instead, bounded since round 64.
CHANNEL_CELLS = 50

#: The one scaling shipped before each kind of divide had its own (fitted on main-divide segments only).
SINGLE_SCALING = (-1.28, 1.25)


def half_cell(dem):
    """``dem`` resampled bilinearly at the corners of its cells (half a cell east and south of each centre).

    Bilinear interpolation midway between four centres is their mean (common practice). The grid keeps its shape so
    that the benchmark's truth, read by row, still applies: the last row and column interpolate along the edge and
    the last cell keeps its value. The transform moves half a cell, so the map coordinates stay true.
    """
    import numpy as np
    from affine import Affine

    from divides.io.dem import Dem

    z = np.asarray(dem.elevation, dtype=np.float64)
    out = z.copy()
    out[:-1, :-1] = 0.25 * (z[:-1, :-1] + z[1:, :-1] + z[:-1, 1:] + z[1:, 1:])
    out[-1, :-1] = 0.5 * (z[-1, :-1] + z[-1, 1:])
    out[:-1, -1] = 0.5 * (z[:-1, -1] + z[1:, -1])
    moved = dem.transform @ Affine.translation(0.5, 0.5)
    return Dem.from_array(out, transform=moved, crs=dem.crs,
                          cell_size=None if dem.crs is not None else float(abs(dem.transform.a)))


#: Round 64's candidate defaults of the screening's channel area: (floor in cells, cap as a share of the valid area).
CHANNEL_AREA_RULES = {"S": (None, None), "CAP0.2": (None, 0.002), "CLIP0.2": (50, 0.002), "CLIP0.5": (50, 0.005)}


def rule_channel_area(dem, rule: str, closed_edges) -> float:
    """The channel area (m²) round 64's candidate ``rule`` gives ``dem``: the slope–area value floored, capped."""
    from divides.assess.assessment import AssessConfig
    from divides.terrain.channels import bounded_channel_threshold, suggest_channel_threshold
    from divides.terrain.routing import route

    config = AssessConfig.from_options(closed_edges=closed_edges)
    flow = route(dem, conditioning=config.conditioning, sea_level=config.sea_level_m, closed_edges=closed_edges)
    floor, cap = CHANNEL_AREA_RULES[rule]
    choice = (suggest_channel_threshold(flow) if cap is None else
              bounded_channel_threshold(flow, max_share=cap, min_cells=floor))
    return choice.value_m2


def screen_case(case, error=None, told: bool = True, *, resample: bool = False, tell_n: bool = False,
                **overrides):
    """Screen ``case`` with the validation's options; with ``error`` (a DemError) its DEM carries that error,
    and screening is told it when ``told``; with ``resample`` the DEM is :func:`half_cell`'s; ``tell_n``: the
    screening is told the case's slope exponent (else it assumes its default, 1)."""
    from divides.assess.screen import screen

    options = dict(theta=case.parameters["theta"], closed_edges=case.closed_edges, workers=1, seed=0,
                   channel_area_m2=CHANNEL_CELLS * case.cell_size ** 2)
    if tell_n:
        options["n"] = float(case.parameters["n"])
    if error is not None and told:
        options.update(dem_error_m=error.sigma_m, dem_error_length_m=error.length_m)
    dem = case.dem(error)
    dem = half_cell(dem) if resample else dem
    rule = overrides.pop("channel_area_rule", None)
    if rule is not None:
        overrides["channel_area_m2"] = rule_channel_area(dem, rule, case.closed_edges)
    return screen(dem, **{**options, **overrides})


def suggested_theta(case) -> float:
    """The concavity `divides inspect` suggests for ``case``'s DEM (its own routing, the closed edges as screened):
    what a user who does not know θ would screen with."""
    import divides
    from divides.cli.inspect_cmd import suggest_parameters

    graph = divides.route(case.dem(), closed_edges=case.closed_edges)
    return float(suggest_parameters(graph)["theta"]["value"])


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
            f"({r['order_violations']}) alarms {r['alarms']} (main {r['alarms_main']}) max {_fmt(r['max_alarm'])}"
            + (f" lateral {r['lateral_segments']} (mov {r['lateral_moving']}, stab {r['lateral_stable']}, "
               f"alarms {r['lateral_alarms']})" if "lateral" in r else ""))


def _markdown(r: dict) -> str:
    """One row of the per-case tables of docs/validation.md (Regional screening)."""
    def no(v):
        return "–" if v is None else ("yes" if v else "**no**")
    top = "; ".join(f"#{t['rank']} {t['moving_share']:.0%} " + ("–" if t["azimuth_error"] is None
                                                               else f"{t['azimuth_error']:.0f}°") for t in r["top"])
    slow = r["stretches"] - r["moving_stretches"] - r["stable_stretches"]
    order = "–" if r["order_ok"] is None else f"{no(r['order_ok'])} ({r['order_violations']})"
    lat = (f"{r['lateral_segments']} ({r['lateral_moving']} / {r['lateral_stable']})" if "lateral" in r else "–")
    return (f"| {r['index']} | {r['family']} | {r['forced_side']} | {r['moving_stretches']} / {r['stable_stretches']} / "
            f"{slow} | {r['main_segments']} ({r['moving_segments']} / {r['stable_segments']}) | {lat} | "
            f"{_fmt(r['coverage'], '.0%')} | {top or '–'} | {no(r['top_ok'])} | {order} | {r['alarms']} "
            f"({r['alarms_by_kind']['main']} / {r['alarms_by_kind']['lateral']}) | {_fmt(r['max_alarm'])} |")


def _logit(p):
    import numpy as np

    p = np.clip(np.asarray(p, dtype=float), 1e-4, 1 - 1e-4)
    return np.log(p / (1 - p))


def _labelled(rows: list[dict], kind: str | None, evidence: bool = False) -> tuple[list, list[float]]:
    """P(a) + P(b) (with ``evidence``, screen's ``evidence_features``) and the truth (1 moving, 0 not moving)
    of every segment of ``kind`` (None: all) with both.

    Main-divide segments at least 70 % in moving stretches are 1, at least 70 % in stable ones 0;
    segments between neighbouring outlet basins draining off the same edge take the class of their pair
    (area exchanged); the rest, and segments without probabilities, are left out. ``kind`` is the
    screening's own (``divide_kind``), the one its scaling is chosen by.
    """
    x, y = [], []
    for r in rows:
        for m in r["main"] + r.get("lateral", []):
            p = m["probabilities"]
            if p is None or not (m["in_moving"] or m["in_stable"]) or (kind is not None and m["kind"] != kind):
                continue
            x.append(list(evidence_features(p, m, m["kind"])) if evidence else p.get("a", 0.0) + p.get("b", 0.0))
            y.append(1.0 if m["in_moving"] else 0.0)
    return x, y


def fit_instability(rows: list[dict], kind: str, evidence: bool = False) -> dict:
    """Platt scaling (Platt 1999) of P(a) + P(b) to the measured truth of the segments of one kind; with
    ``evidence``, the logistic model of screen.INSTABILITY_EVIDENCE (coefficients ``w``)."""
    import numpy as np
    from scipy.optimize import minimize

    x, y = _labelled(rows, kind, evidence)
    y = np.asarray(y)
    design = np.asarray(x, dtype=float) if evidence else _logit(x)[:, None]
    design = np.column_stack([np.ones(y.size), design])

    def loss(w):
        t = design @ w
        return float(np.sum(np.logaddexp(0.0, t) - y * t))

    w = minimize(loss, np.r_[0.0, 1.0, np.zeros(design.shape[1] - 2)], method="BFGS").x
    return {"kind": kind, "alpha": float(w[0]), "beta": float(w[1]), "w": [float(v) for v in w],
            "n": int(y.size), "moving": int(y.sum()), "log_loss": loss(w) / max(y.size, 1)}


def probability_scores(x, y) -> dict:
    """Log loss, AUC (Mann-Whitney) and expected calibration error (ten equal bins) of probabilities ``x``
    against outcomes ``y`` (1 moving, 0 not moving); probabilities clipped to [1e-4, 1 - 1e-4]."""
    import numpy as np

    x, y = np.clip(np.asarray(x, dtype=float), 1e-4, 1 - 1e-4), np.asarray(y, dtype=float)
    if not y.size:
        return {"n": 0, "moving": 0, "log_loss": float("nan"), "auc": float("nan"), "ece": float("nan")}
    pos, neg = x[y == 1], x[y == 0]
    auc = float(np.mean((pos[:, None] > neg[None, :]) + 0.5 * (pos[:, None] == neg[None, :]))) \
        if pos.size and neg.size else float("nan")
    bins = np.minimum((x * 10).astype(int), 9)
    ece = sum(abs(x[bins == b].mean() - y[bins == b].mean()) * np.sum(bins == b) for b in np.unique(bins)) / y.size
    loss = float(np.mean(-(y * np.log(x) + (1 - y) * np.log(1 - x))))
    return {"n": int(y.size), "moving": int(y.sum()), "log_loss": loss, "auc": auc, "ece": float(ece)}


def scaled_scores(rows: list[dict], kind: str | None, scaling: tuple[float, float] | None) -> dict:
    """:func:`probability_scores` of P(a) + P(b) (``scaling`` None) or of its Platt scaling ``(alpha, beta)``."""
    import numpy as np

    x, y = _labelled(rows, kind)
    x = np.asarray(x, dtype=float)
    if scaling is not None:
        x = 1.0 / (1.0 + np.exp(-(scaling[0] + scaling[1] * _logit(x))))
    return probability_scores(x, y)


def given_values(rows: list[dict], kind: str, key: str = "instability") -> tuple[list[float], list[float]]:
    """The instability the screening gave (or another value under ``key``) and the truth (1 moving, 0 not moving)
    of every judged segment of ``kind`` in a moving or a still stretch (main) or pair (lateral)."""
    x, y = [], []
    for r in rows:
        for m in r["main"] + r.get("lateral", []):
            if m["probabilities"] is None or not (m["in_moving"] or m["in_stable"]) or m["kind"] != kind:
                continue
            x.append(m[key])
            y.append(1.0 if m["in_moving"] else 0.0)
    return x, y


def given_scores(rows: list[dict], kind: str, key: str = "instability") -> dict:
    """:func:`probability_scores` of the instability the screening gave (or of another value under ``key``)."""
    return probability_scores(*given_values(rows, kind, key))


def _record_extra_runs(balances: tuple[str, ...]) -> None:
    """Make every screening of this process also run the landscape under ``balances`` and keep each segment's
    shift in them (``forward_shift_<balance>_cells``, model cells into b) in the records (round 37)."""
    import divides.assess.screen as screening
    import divides.model.regional_benchmark as benchmark
    from divides.model.landscape_shift import landscape_shifts, model_start
    from divides.terrain.tiled_flow import tiled_routing

    keys = tuple(f"forward_shift_{b}_cells" for b in balances)
    evidence = screening._landscape_evidence

    def with_extra_runs(dem, flow, rows, labels, outlet_of, config, threshold):
        out = evidence(dem, flow, rows, labels, outlet_of, config, threshold)
        options = dict(theta=float(config.theta), n=float(config.n), closed_edges=config.closed_edges,
                       channel_area_m2=threshold)
        with tiled_routing(None):
            start = model_start(dem, **options)
            runs = landscape_shifts(dem, balances=balances, start=start, **options)
        sides = outlet_of[runs[0].on_model_grid(labels)]
        for r in rows:
            a, b = int(outlet_of[r["seg"].label_a]), int(outlet_of[r["seg"].label_b])
            for key, run in zip(keys, runs):
                r[key] = run.piece_shift(r["seg"].line, sides, a, b)
        return out

    screening._landscape_evidence = with_extra_runs
    screening.EVIDENCE_KEYS = (*screening.EVIDENCE_KEYS, *keys)
    benchmark.EVIDENCE_KEYS = (*benchmark.EVIDENCE_KEYS, *keys)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--n", type=int, default=24)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--split", choices=("training", "held-out", "all"), default="training")
    parser.add_argument("--family", default=None,
                        help="only the cases of this family (e.g. partial_base_level_fall; known from the index)")
    parser.add_argument("--generate-only", action="store_true")
    parser.add_argument("--hide-truth", action="store_true",
                        help="with --generate-only: also measure the lateral truth, print no truth at all (for a "
                             "held-out draw before its judgement)")
    parser.add_argument("--json", default=None, help="write the per-case results as JSON lines")
    parser.add_argument("--fit", action="store_true",
                        help="print the instability's Platt scaling fitted on the cases run (use --split training)")
    parser.add_argument("--markdown", action="store_true", help="print the per-case rows of docs/validation.md")
    parser.add_argument("--no-forward-run", action="store_true",
                        help="screen with the near-divide contrasts alone (screen's forward_run=False)")
    parser.add_argument("--min-judged-cells", type=float, default=None,
                        help="pool segments shorter than this many cells (default: screen's MIN_JUDGED_CELLS)")
    parser.add_argument("--dem-error", type=float, default=None, metavar="SIGMA",
                        help="add correlated DEM error of this σ (m) to each observed surface before screening")
    parser.add_argument("--dem-error-cells", type=float, default=3.0, metavar="L",
                        help="correlation length of that error in cells (default 3)")
    parser.add_argument("--screen-assumes-default", action="store_true",
                        help="do not tell screening the error added (it keeps its default error model)")
    parser.add_argument("--half-cell", action="store_true",
                        help="screen each DEM resampled half a cell off its grid (half_cell; the truth unchanged)")
    parser.add_argument("--auto-channel-area", action="store_true",
                        help="screen with screening's default channel area (read from the DEM), not CHANNEL_CELLS")
    parser.add_argument("--channel-area-rule", choices=tuple(CHANNEL_AREA_RULES), default=None,
                        help="screen with round 64's candidate default channel area (CHANNEL_AREA_RULES)")
    parser.add_argument("--extra-balances", nargs="*", default=(), metavar="BALANCE",
                        help="also run the landscape under these balances (e.g. steady-local10) and record each "
                             "segment's shift as forward_shift_<balance>_cells (a measuring aid; the screening's "
                             "own figures do not change)")
    parser.add_argument("--slope-exponent", type=float, default=1.0, metavar="N",
                        help="cases grown with this slope exponent n (the benchmark's are 1; others are cached apart)")
    parser.add_argument("--tell-n", action="store_true",
                        help="tell the screening the cases' slope exponent (else it assumes its default, 1)")
    parser.add_argument("--theta", default=None, metavar="VALUE|inspect",
                        help="screen with this concavity, or with the one `divides inspect` suggests from each DEM, "
                        "instead of the case's true θ (round 69)")
    args = parser.parse_args()
    if args.extra_balances:
        _record_extra_runs(tuple(args.extra_balances))
    from divides.errors import DividesError
    from divides.model.benchmark import split_of
    from divides.terrain.dem_error import DemError
    from divides.model.regional_benchmark import (
        FAMILIES,
        case_seed,
        lateral_truth,
        load_or_build,
        score,
        stretch_class,
    )

    rows, refused = [], []
    for i in range(args.n):
        if args.split != "all" and split_of(case_seed(args.seed, i)) != args.split:
            continue  # the split is known from the seed before the case is built
        if args.family is not None and FAMILIES[i % len(FAMILIES)] != args.family:
            continue
        t0 = time.perf_counter()
        case = load_or_build(args.seed, i, n=args.slope_exponent)
        built = time.perf_counter() - t0
        if args.generate_only and args.hide_truth:
            lateral_truth(case)  # cached, so that screenings run side by side later only read it
            print(f"{i:>3} {case.split:<9} {case.family:<28} built in {time.perf_counter() - t0:.0f} s", flush=True)
            continue
        if args.generate_only:
            print(f"{i:>3} {case.split:<9} {case.family:<28} built in {built:.0f} s; stretches (cells/τ) "
                  + " ".join(f"{s['rate_m_per_yr'] / case.threshold_m_per_yr:+.1f}"
                             + {"a": "<", "b": ">", "stable": ".", "slow": "~", None: "?"}[
                                 stretch_class(s, case.threshold_m_per_yr)] for s in case.stretches), flush=True)
            continue
        extra = {} if args.min_judged_cells is None else {"min_judged_m": args.min_judged_cells * case.cell_size}
        extra["forward_run"] = not args.no_forward_run
        if args.auto_channel_area:
            extra["channel_area_m2"] = None
        if args.channel_area_rule:
            extra["channel_area_rule"] = args.channel_area_rule
        if args.theta is not None:
            extra["theta"] = suggested_theta(case) if args.theta == "inspect" else float(args.theta)
        error = None if args.dem_error is None else DemError(args.dem_error, args.dem_error_cells * case.cell_size)
        try:
            screening = screen_case(case, error, not args.screen_assumes_default, resample=args.half_cell,
                                    tell_n=args.tell_n, **extra)
        except DividesError as exc:  # a refusal is a miss of every target the case has, not a crash of the run
            classes = [stretch_class(s, case.threshold_m_per_yr) for s in case.stretches]
            refused.append({"master_seed": case.master_seed, "index": case.index, "family": case.family,
                            "split": case.split, "refused": str(exc),
                            "moving_stretches": sum(c in ("a", "b") for c in classes),
                            "stable_stretches": sum(c == "stable" for c in classes)})
            print(f"{i:>3} {case.split:<9} {case.family:<28} refused: {exc}", flush=True)
            continue
        result = score(case, screening, lateral=lateral_truth(case))
        result["theta_screened"] = extra.get("theta", case.parameters["theta"])
        rows.append(result)
        print(_line(result), flush=True)
    if args.generate_only:
        return
    if args.json:
        with open(args.json, "w") as fh:
            fh.writelines(json.dumps(r, default=float) + "\n" for r in rows + refused)
    if args.markdown:
        print("\n".join(_markdown(r) for r in rows))
    if args.fit:
        fits = {k: fit_instability(rows, k) for k in KINDS}
        print("INSTABILITY_SCALING = {" + ", ".join(f'"{k}": ({f["alpha"]:.2f}, {f["beta"]:.2f})' for k, f in fits.items())
              + "}  # " + "; ".join(f"{k}: {f['n']} segments ({f['moving']} moving), log loss {f['log_loss']:.3f}"
                                    for k, f in fits.items()))
        fits = {k: fit_instability(rows, k, evidence=True) for k in KINDS}
        print("INSTABILITY_EVIDENCE = {" + ", ".join(
            f'"{k}": (' + ", ".join(f"{v:.2f}" for v in f["w"]) + ")" for k, f in fits.items())
            + "}  # " + "; ".join(f"{k}: {f['n']} segments ({f['moving']} moving), log loss {f['log_loss']:.3f}"
                                  for k, f in fits.items()))
    for split in ("training", "held-out"):
        part = [r for r in rows if r["split"] == split]
        if not part:
            continue
        judged = [r for r in part if r["top_ok"] is not None]
        ordered = [r for r in part if r["order_ok"] is not None]
        steady = [r for r in part if r["family"].startswith("steady_")]
        if any(r["split"] == split for r in refused):
            print(f"{split}: {sum(r['split'] == split for r in refused)} cases refused (not counted below)")
        print(f"{split}: {len(part)} cases; top ok {sum(bool(r['top_ok']) for r in judged)}/{len(judged)}; "
              f"order ok {sum(bool(r['order_ok']) for r in ordered)}/{len(ordered)}; "
              f"steady without alarm {sum(r['alarm_ok'] for r in steady)}/{len(steady)}; "
              f"coverage >= 90 % {sum(r['coverage_ok'] for r in part)}/{len(part)}")
        for k in KINDS:
            raw, shipped = scaled_scores(part, k, None), scaled_scores(part, k, INSTABILITY_SCALING[k])
            single = scaled_scores(part, k, SINGLE_SCALING)
            given = given_scores(part, k)
            print(f"  {k}: {raw['n']} segments with truth ({raw['moving']} moving): log loss / AUC of P(a) + P(b) "
                  f"{raw['log_loss']:.3f} / {raw['auc']:.2f}, of the single main-divide scaling "
                  f"{single['log_loss']:.3f} / {single['auc']:.2f}, of the shipped scaling {shipped['log_loss']:.3f} / {shipped['auc']:.2f}, "
                  f"of the instability given {given['log_loss']:.3f} / {given['auc']:.2f}")
            if any(m.get("motion_probability") is not None for r in part for m in r["main"]):
                prob = given_scores(part, k, "motion_probability")
                print(f"  {k}: probability of motion (round 42): log loss {prob['log_loss']:.3f}, AUC "
                      f"{prob['auc']:.2f}, calibration error {prob['ece']:.3f}; the instability's "
                      f"{given['ece']:.3f}")
        lat = [m for r in part for m in r.get("lateral", [])]
        steady_lat = [m for r in steady for m in r.get("lateral", [])]
        print(f"  lateral outlet-basin segments {len(lat)}: truth moving {sum(m['in_moving'] for m in lat)}, "
              f"not moving {sum(m['in_stable'] for m in lat)}, slow {sum(m['truth'] == 'slow' for m in lat)}, "
              f"unmeasured {sum(m['truth'] is None for m in lat)}; in steady controls {len(steady_lat)} "
              f"(moving {sum(m['in_moving'] for m in steady_lat)}, not moving {sum(m['in_stable'] for m in steady_lat)})")
        for k in KINDS:  # the score's lists are by the benchmark's edges; they agree with the kinds
            alarmed = [m for r in steady for m in r.get(k, []) if raises_alarm(m)]
            print(f"  {k}-divide alarms in steady controls by the truth of the segment: "
                  f"moving {sum(m['in_moving'] for m in alarmed)}, not moving {sum(m['in_stable'] for m in alarmed)}, "
                  f"slow or unmeasured {sum(not (m['in_moving'] or m['in_stable']) for m in alarmed)}")
        print("  alarms in steady controls by kind: " + ", ".join(
            f"{k} {sum(r['alarms_by_kind'][k] for r in steady)}" for k in KINDS) + "; per case: " + ", ".join(
            f"{r['index']} {r['family']} {r['alarms']}" for r in steady))


if __name__ == "__main__":
    main()
