"""Channel network: threshold, heads, junctions, links and Strahler order."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from divides import Dem, route
from divides.errors import ParameterError
from divides.terrain.channels import (
    FALLBACK_THRESHOLD_M2,
    bounded_channel_threshold,
    extract_channels,
    slope_area_break,
    suggest_channel_threshold,
)


def _valley_network(seed: int = 0, n: int = 80) -> Dem:
    """Rough terrain draining north, so several channels join on the way."""
    rng = np.random.default_rng(seed)
    z = np.add.outer(np.arange(n) * 2.0, np.zeros(n)) + rng.random((n, n)) * 6.0
    return Dem.from_array(z, cell_size=10.0)


def _channel_graph(net) -> nx.DiGraph:
    g = nx.DiGraph()
    g.add_nodes_from(range(net.size))
    for k, d in enumerate(net.down):
        if d >= 0:
            g.add_edge(k, int(d), weight=float(net.step[k]))
    return g


def _strahler_reference(g: nx.DiGraph) -> dict[int, int]:
    """Strahler (1957) ordering by the textbook rule, on a networkx graph."""
    order = {}
    for v in nx.topological_sort(g):
        ups = [order[u] for u in g.predecessors(v)]
        if not ups:
            order[v] = 1
        else:
            top = max(ups)
            order[v] = top + 1 if ups.count(top) >= 2 else top
    return order


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_network_topology_matches_networkx(seed):
    # References: networkx in/out degrees for heads and junctions; Strahler (1957) rule recomputed.
    flow = route(_valley_network(seed))
    net = extract_channels(flow, threshold_m2=20 * 100.0)
    assert net.size > 50
    np.testing.assert_array_equal(net.mask().ravel(), flow.area.ravel() >= 2000.0)
    g = _channel_graph(net)
    assert sorted(net.heads.tolist()) == sorted(v for v in g if g.in_degree(v) == 0)
    assert sorted(net.junctions.tolist()) == sorted(v for v in g if g.in_degree(v) >= 2)
    assert sorted(net.outlets.tolist()) == sorted(v for v in g if g.out_degree(v) == 0)
    reference = _strahler_reference(g)
    assert [reference[k] for k in range(net.size)] == net.strahler.tolist()
    assert net.strahler.max() >= 2


def test_links_partition_the_network_and_add_up():
    # Each link starts at a head or a junction (definition), so links = heads + junctions;
    # where every junction joins two channels, links = 2 x heads - outlets (Shreve 1966).
    flow = route(_valley_network(4))
    net = extract_channels(flow, threshold_m2=2000.0)
    links = net.links
    g = _channel_graph(net)
    assert len(links["start"]) == net.heads.size + net.junctions.size
    assert links["n_cells"].sum() == net.size
    if np.all(net.n_donors[net.junctions] == 2):
        assert len(links["start"]) == 2 * net.heads.size - net.outlets.size
    # total link length = total channel length (networkx sum of the step lengths)
    assert links["length_m"].sum() == pytest.approx(sum(w for *_, w in g.edges(data="weight")))
    # each link's length = networkx path length from its start to the cell below its end
    for s, e, length in zip(links["start"], links["end"], links["length_m"]):
        target = int(net.down[e]) if net.down[e] >= 0 else int(e)
        assert length == pytest.approx(nx.shortest_path_length(g, int(s), target, weight="weight"))
    assert np.all(links["drop_m"] >= 0)
    assert np.all(links["order"] == net.strahler[links["start"]])


def test_slope_area_break_recovers_a_known_break():
    # Synthetic slope-area data: S rises as A^0.2 on hillslopes, falls as A^-0.5 on channels
    # (Montgomery & Dietrich 1988 describe this shape); break placed at 2e5 m².
    rng = np.random.default_rng(0)
    area = 10 ** rng.uniform(2, 8, 40000)
    a_c = 2e5
    slope = np.where(area < a_c, 0.3 * (area / a_c) ** 0.2, 0.3 * (area / a_c) ** -0.5)
    slope *= np.exp(rng.normal(0, 0.3, area.size))
    found = slope_area_break(area, slope)
    assert found is not None
    assert abs(np.log10(found) - np.log10(a_c)) <= 0.15  # within 1.5 bins of 0.1 decade
    # a single power law has no break
    assert slope_area_break(area, 0.3 * (area / a_c) ** -0.5 * np.exp(rng.normal(0, 0.3, area.size))) is None


def test_bounded_threshold_floors_then_caps_as_documented():
    # The documented rule (docs/methods.md §2), by arithmetic: a plane's fallback (50 cells of 900 m² here) is capped
    # at a share of the valid area, a floor raises it, and the cap wins over the floor; nodata cells are not area.
    z = np.add.outer(np.arange(40.0), np.zeros(40))
    z[:5, :8] = np.nan
    flow = route(Dem.from_array(z, cell_size=30.0))
    valid_m2 = (40 * 40 - 5 * 8) * 900.0
    plain = suggest_channel_threshold(flow)
    assert plain.value_m2 == pytest.approx(50 * 900.0)
    capped = bounded_channel_threshold(flow, max_share=0.002)
    assert capped.value_m2 == pytest.approx(0.002 * valid_m2)
    assert capped.source == plain.source and "capped at 0.2 %" in capped.reason
    raised = bounded_channel_threshold(flow, max_share=1.0, min_cells=80)
    assert raised.value_m2 == pytest.approx(80 * 900.0) and "raised to 80 cells" in raised.reason
    assert bounded_channel_threshold(flow, max_share=0.002, min_cells=80).value_m2 == pytest.approx(0.002 * valid_m2)
    untouched = bounded_channel_threshold(flow, max_share=1.0)
    assert (untouched.value_m2, untouched.reason) == (plain.value_m2, plain.reason)
    assert bounded_channel_threshold(flow, max_share=0.002, choice=plain) == capped  # the caller's own reading
    net = extract_channels(flow, default=lambda f: bounded_channel_threshold(f, max_share=0.002))
    assert net.threshold.value_m2 == capped.value_m2


def test_threshold_fallback_and_user_value():
    dem = Dem.from_array(np.add.outer(np.arange(40.0), np.zeros(40)), cell_size=30.0)
    flow = route(dem)
    choice = suggest_channel_threshold(flow)
    # A plane has no slope-area break: fall back to 1 km² bounded to 50 cells .. 1 % of the area.
    assert choice.source == "fallback"
    total = 40 * 40 * 900.0
    expected = min(np.clip(FALLBACK_THRESHOLD_M2, 50 * 900.0, max(50 * 900.0, 0.01 * total)), 0.05 * total)
    assert choice.value_m2 == pytest.approx(expected)
    net = extract_channels(flow, threshold_m2=5000.0)
    assert net.threshold.source == "user"
    for bad in (0.0, -5.0, float("nan")):
        with pytest.raises(ParameterError, match="channel threshold"):
            extract_channels(flow, threshold_m2=bad)
