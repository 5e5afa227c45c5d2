"""The train graph: nodes, edge kinds and flows, recycle loops, and the topology checks."""

from __future__ import annotations

from pathlib import Path

import networkx as nx
import pytest

from airtaper.layout import load_layout, parse_layout
from airtaper.layout.graph import build_graph, check_train, forward_flows
from airtaper.layout.reader import Collector
from airtaper.layout.types import Recycle, ReturnSludge, StepFeed, Wasting


@pytest.fixture(scope="module")
def demo():
    return load_layout(Path(__file__).resolve().parents[2] / "layouts" / "demo.toml")


def test_demo_graph_nodes_and_edge_kinds(demo):
    g = build_graph(demo)
    assert isinstance(g, nx.DiGraph)
    assert set(g.nodes) == {"influent", "Z1", "Z2", "Z3", "Z4", "Z5", "Z6", "clarifier", "effluent", "waste"}
    kinds = {(u, v): k for u, v, k in g.edges(data="kind")}
    assert kinds == {
        ("influent", "Z1"): "step_feed",
        ("Z1", "Z2"): "forward", ("Z2", "Z3"): "forward", ("Z3", "Z4"): "forward", ("Z4", "Z5"): "forward",
        ("Z5", "Z6"): "forward", ("Z6", "clarifier"): "forward",
        ("Z6", "Z1"): "recycle", ("clarifier", "Z1"): "return_sludge",
        ("clarifier", "effluent"): "effluent", ("clarifier", "waste"): "waste",
    }
    assert g.nodes["Z3"]["zone"] is demo.zone("Z3")
    assert g.edges["Z6", "Z1"]["id"] == "IR"


def test_demo_flows_balance(demo):
    g = build_graph(demo)
    q = demo.influent.flow_m3_d
    for p in range(24):
        # everything entering Z1 passes every zone up to Z6, where the internal recycle leaves
        assert g.edges["Z1", "Z2"]["flow"][p] == pytest.approx(q[p] * (1 + 0.8 + 2.5))
        assert g.edges["Z5", "Z6"]["flow"][p] == pytest.approx(q[p] * (1 + 0.8 + 2.5))
        assert g.edges["Z6", "clarifier"]["flow"][p] == pytest.approx(q[p] * 1.8)
        assert g.edges["influent", "Z1"]["flow"][p] == q[p]
    # waste follows the target SRT: its flow (and so the effluent flow) is not fixed by the layout
    assert g.edges["clarifier", "waste"]["flow"] is None and g.edges["clarifier", "effluent"]["flow"] is None


def test_recycle_loops_are_cycles_of_the_graph(demo):
    g = build_graph(demo)
    cycles = {tuple(sorted(c)) for c in nx.simple_cycles(g)}
    assert tuple(sorted(["Z1", "Z2", "Z3", "Z4", "Z5", "Z6"])) in cycles  # internal recycle
    assert tuple(sorted(["Z1", "Z2", "Z3", "Z4", "Z5", "Z6", "clarifier"])) in cycles  # return sludge
    assert len(cycles) == 2


def test_fixed_waste_gives_effluent_flow(three_data, layouts_dir):
    layout = parse_layout(three_data, "x.toml", layouts_dir)
    g = build_graph(layout)
    assert g.edges["clarifier", "waste"]["flow"] == (45.0,) * 24
    assert g.edges["clarifier", "effluent"]["flow"] == (3000.0 - 45.0,) * 24
    assert g.edges["T3", "clarifier"]["flow"] == (6000.0,) * 24


def test_step_feed_edges_and_forward_flows(demo_data, layouts_dir):
    demo_data["flows"]["step_feed"] = [{"zone": "Z1", "fraction": 0.7}, {"zone": "Z3", "fraction": 0.3}]
    layout = parse_layout(demo_data, "sf.toml", layouts_dir)
    g = build_graph(layout)
    q = layout.influent.flow_m3_d
    assert g.edges["influent", "Z3"]["kind"] == "step_feed"
    assert g.edges["influent", "Z3"]["flow"][10] == pytest.approx(0.3 * q[10])
    assert g.edges["Z2", "Z3"]["flow"][10] == pytest.approx(q[10] * (0.7 + 0.8 + 2.5))
    assert g.edges["Z3", "Z4"]["flow"][10] == pytest.approx(q[10] * (1.0 + 0.8 + 2.5))


def test_sludge_reaeration_zone_fed_only_by_return_sludge_is_reachable(demo_data, layouts_dir):
    demo_data["flows"]["step_feed"] = [{"zone": "Z2", "fraction": 1.0}]
    demo_data["flows"]["recycles"][0]["to_zone"] = "Z2"
    layout = parse_layout(demo_data, "rs.toml", layouts_dir)  # Z1 gets return sludge only: valid
    assert build_graph(layout).edges["Z1", "Z2"]["flow"][0] == pytest.approx(0.8 * layout.influent.flow_m3_d[0])


# --- check_train directly ------------------------------------------------------------------------
IDS = ["A", "B", "C"]
Q = (100.0, 200.0)


def _ras(to="A", ratio=1.0):
    return ReturnSludge(to, tuple(ratio * q for q in Q), ratio)


def _rec(frm, to, ratio=2.0, ident="R"):
    return Recycle(ident, frm, to, tuple(ratio * q for q in Q), ratio)


def _check(step_feed=(StepFeed("A", 1.0),), recycles=(), ras=None, ids=IDS):
    col = Collector("t.toml")
    check_train(col, ids, list(step_feed), list(recycles), ras or _ras(), Wasting(None, 10.0), Q, True)
    return [str(p) for p in col.problems], [str(w) for w in col.warnings]


def test_valid_train_has_no_problems():
    assert _check(recycles=[_rec("C", "A")]) == ([], [])


def test_recycle_from_a_missing_zone():
    errors, _ = _check(recycles=[_rec("D", "A")])
    assert errors == ["error: t.toml: flows.recycles.R.from_zone: no such zone (got 'D', expected one of A, B, C)"]


def test_recycle_to_a_missing_zone():
    errors, _ = _check(recycles=[_rec("C", "X")])
    assert errors == ["error: t.toml: flows.recycles.R.to_zone: recycle to or from no zone "
                      "(got 'X', expected one of A, B, C)"]


def test_recycle_self_loop():
    errors, _ = _check(recycles=[_rec("B", "B")])
    assert errors == ["error: t.toml: flows.recycles.R.to_zone: recycle returns to the zone it leaves "
                      "(got 'B', expected a zone other than from_zone)"]


def test_two_recycles_with_the_same_ends():
    errors, _ = _check(recycles=[_rec("C", "A", ident="R1"), _rec("C", "A", ident="R2")])
    assert errors == ["error: t.toml: flows.recycles.R2: same ends as recycle R1; merge them (got 'C -> A')"]


def test_recycle_to_the_next_zone_is_forward_flow():
    errors, _ = _check(recycles=[_rec("A", "B")])
    assert errors == ["error: t.toml: flows.recycles.R.to_zone: a recycle to the next zone downstream is just "
                      "forward flow (got 'B', expected a zone upstream of from_zone)"]


def test_downstream_bypass_is_a_warning_until_forward_flow_goes_negative():
    errors, warnings = _check(recycles=[_rec("A", "C", ratio=1.5)])
    assert errors == []
    assert warnings == ["warning: t.toml: flows.recycles.R.to_zone: recycle runs downstream (A -> C): a bypass, "
                        "not a recycle"]
    errors, _ = _check(recycles=[_rec("A", "C", ratio=2.5)])  # only 2 Q (influent + RAS) enters A
    assert errors == [f"error: t.toml: flows.recycles.R: forward flow {e} is negative in 2 of 2 periods "
                      "(first period 1) (got -50.0, expected >= 0 m3/d)" for e in ("A -> B", "B -> C")]


def test_unreachable_zone():
    errors, _ = _check(step_feed=[StepFeed("B", 1.0)], ras=_ras("B"))
    assert errors == ["error: t.toml: zones.A: zone receives no flow (not reachable from the influent) "
                      "(expected a step feed, recycle or return sludge into it or a zone upstream)"]


def test_zero_fraction_step_feed_does_not_reach():
    errors, _ = _check(step_feed=[StepFeed("A", 0.0), StepFeed("B", 1.0)], ras=_ras("B"))
    assert errors == ["error: t.toml: zones.A: zone receives no flow (not reachable from the influent) "
                      "(expected a step feed, recycle or return sludge into it or a zone upstream)"]


def test_step_feed_fractions_must_sum_to_one():
    errors, _ = _check(step_feed=[StepFeed("A", 0.5), StepFeed("C", 0.6)])
    assert errors == ["error: t.toml: flows.step_feed: step-feed fractions must sum to 1 (got 1.1, expected 1)"]


def test_step_feed_to_a_missing_zone_and_twice_to_one_zone():
    errors, _ = _check(step_feed=[StepFeed("A", 0.5), StepFeed("A", 0.25), StepFeed("Q", 0.25)])
    assert errors == [
        "error: t.toml: flows.step_feed[2].zone: zone fed twice; give one fraction per zone (got 'A', expected one "
        "[[flows.step_feed]] per zone)",
        "error: t.toml: flows.step_feed[3].zone: no such zone (got 'Q', expected one of A, B, C)",
    ]


def test_return_sludge_to_a_missing_zone():
    errors, _ = _check(ras=_ras("Z"))
    assert errors == ["error: t.toml: flows.return_sludge.to_zone: no such zone (got 'Z', expected one of A, B, C)"]


def test_forward_flows_formula():
    fwd = forward_flows(IDS, [StepFeed("A", 0.6), StepFeed("B", 0.4)], [_rec("C", "A")], _ras("A", 0.5), Q)
    # A: 0.6 Q + 0.5 Q + 2 Q; B: + 0.4 Q; C: - 2 Q (recycle leaves)
    assert fwd[0] == pytest.approx((310.0, 620.0))
    assert fwd[1] == pytest.approx((350.0, 700.0))
    assert fwd[2] == pytest.approx((150.0, 300.0))
