"""The train as a directed graph, and the checks that need its topology.

Nodes: ``"influent"``, every zone id, ``"clarifier"``, ``"effluent"``, ``"waste"``.
Edges carry ``kind`` (``"step_feed"``, ``"forward"``, ``"recycle"``,
``"return_sludge"``, ``"effluent"``, ``"waste"``) and ``flow`` (a tuple of m3/d
per period, or ``None`` where it is not fixed by the layout: the waste and
effluent flows when wasting follows a target SRT). Recycle edges also carry
``id``; zone nodes built from a :class:`~airtaper.layout.types.Layout` carry
``zone`` (the Zone).

Flows along the train are fixed by the layout alone (no biology): the forward
flow out of zone *k* is

    F_k = F_(k-1) + sum(step feed into k) + (return sludge into k)
          + sum(recycles into k) - sum(recycles out of k),   F_0 = 0,

and F_last goes to the clarifier. Every F_k must be >= 0 in every period.
"""

from __future__ import annotations

from collections.abc import Sequence

import networkx as nx

from airtaper.layout.reader import Collector
from airtaper.layout.types import Layout, Recycle, ReturnSludge, StepFeed, Wasting

INFLUENT = "influent"
CLARIFIER = "clarifier"
EFFLUENT = "effluent"
WASTE = "waste"
#: Node names no zone may take.
RESERVED_NODES = (INFLUENT, CLARIFIER, EFFLUENT, WASTE)
_TOL_m3_d = 1e-9


def forward_flows(zone_ids: Sequence[str], step_feed: Sequence[StepFeed], recycles: Sequence[Recycle],
                  return_sludge: ReturnSludge | None, influent_flow: Sequence[float]) -> list[tuple[float, ...]]:
    """Forward flow out of each zone per period, m3/d (see the module notes)."""
    n = len(influent_flow)
    index = {z: i for i, z in enumerate(zone_ids)}
    net = [[0.0] * n for _ in zone_ids]
    for sf in step_feed:
        if sf.zone in index:
            for p in range(n):
                net[index[sf.zone]][p] += sf.fraction * influent_flow[p]
    if return_sludge is not None and return_sludge.to_zone in index:
        for p in range(n):
            net[index[return_sludge.to_zone]][p] += return_sludge.flow_m3_d[p]
    for r in recycles:
        if r.from_zone in index and r.to_zone in index:
            for p in range(n):
                net[index[r.to_zone]][p] += r.flow_m3_d[p]
                net[index[r.from_zone]][p] -= r.flow_m3_d[p]
    out = []
    running = [0.0] * n
    for i in range(len(zone_ids)):
        running = [running[p] + net[i][p] for p in range(n)]
        out.append(tuple(running))
    return out


def train_graph(zone_ids: Sequence[str], step_feed: Sequence[StepFeed], recycles: Sequence[Recycle],
                return_sludge: ReturnSludge | None, wasting: Wasting | None,
                influent_flow: Sequence[float]) -> nx.DiGraph:
    """The train graph from its parts (ends that name no zone are left out)."""
    g = nx.DiGraph()
    g.add_node(INFLUENT)
    for z in zone_ids:
        g.add_node(z)
    g.add_nodes_from([CLARIFIER, EFFLUENT, WASTE])
    ids = set(zone_ids)
    n = len(influent_flow)
    for sf in step_feed:
        if sf.zone in ids:
            g.add_edge(INFLUENT, sf.zone, kind="step_feed", flow=tuple(sf.fraction * q for q in influent_flow))
    fwd = forward_flows(zone_ids, step_feed, recycles, return_sludge, influent_flow)
    for i, z in enumerate(zone_ids):
        nxt = zone_ids[i + 1] if i + 1 < len(zone_ids) else CLARIFIER
        g.add_edge(z, nxt, kind="forward", flow=fwd[i])
    for r in recycles:
        if r.from_zone in ids and r.to_zone in ids and not g.has_edge(r.from_zone, r.to_zone):
            g.add_edge(r.from_zone, r.to_zone, kind="recycle", flow=r.flow_m3_d, id=r.id)
    if return_sludge is not None and return_sludge.to_zone in ids:
        g.add_edge(CLARIFIER, return_sludge.to_zone, kind="return_sludge", flow=return_sludge.flow_m3_d)
    if wasting is not None and wasting.flow_m3_d is not None:
        waste = wasting.flow_m3_d
        effluent = tuple(influent_flow[p] - waste[p] for p in range(n))
    else:
        waste = effluent = None
    g.add_edge(CLARIFIER, EFFLUENT, kind="effluent", flow=effluent)
    g.add_edge(CLARIFIER, WASTE, kind="waste", flow=waste)
    return g


def build_graph(layout: Layout) -> nx.DiGraph:
    """The networkx DiGraph of a validated layout's train."""
    g = train_graph([z.id for z in layout.zones], layout.step_feed, layout.recycles, layout.return_sludge,
                    layout.wasting, layout.influent.flow_m3_d)
    for z in layout.zones:
        g.nodes[z.id]["zone"] = z
    return g


def _flowing(flow) -> bool:
    return flow is None or any(q > _TOL_m3_d for q in flow)


def flowing_subgraph(g: nx.DiGraph) -> nx.DiGraph:
    """The edges that carry flow in at least one period (or an unfixed flow)."""
    return g.edge_subgraph([(u, v) for u, v, d in g.edges(data=True) if _flowing(d["flow"])]).copy()


def check_train(col: Collector, zone_ids: Sequence[str], step_feed: Sequence[StepFeed],
                recycles: Sequence[Recycle], return_sludge: ReturnSludge | None, wasting: Wasting | None,
                influent_flow: Sequence[float], flows_known: bool, step_feed_key: str = "flows.step_feed",
                zone_key=lambda z: f"zones.{z}") -> None:
    """Record every topology problem of the train in ``col``.

    ``flows_known`` is False when the influent could not be read; the checks then
    run on a nominal flow of 1 m3/d per period and skip the flow-sign check.
    """
    ids = list(zone_ids)
    if not ids:
        return
    before = col.count
    index = {z: i for i, z in enumerate(ids)}
    # step feed
    seen: set[str] = set()
    for i, sf in enumerate(step_feed, start=1):
        if sf.zone not in index:
            col.error(f"{step_feed_key}[{i}].zone", "no such zone", sf.zone, "one of " + ", ".join(ids))
        elif sf.zone in seen:
            col.error(f"{step_feed_key}[{i}].zone", "zone fed twice; give one fraction per zone", sf.zone,
                      "one [[flows.step_feed]] per zone")
        seen.add(sf.zone)
    total = sum(sf.fraction for sf in step_feed)
    if step_feed and abs(total - 1.0) > 1e-6:
        col.error(step_feed_key, "step-feed fractions must sum to 1", round(total, 9), "1")
    # recycles
    ends: dict[tuple[str, str], str] = {}
    for r in recycles:
        key = f"flows.recycles.{r.id}"
        bad = False
        for end, name in (("from_zone", r.from_zone), ("to_zone", r.to_zone)):
            if name not in index:
                col.error(f"{key}.{end}", "recycle to or from no zone" if end == "to_zone" else "no such zone",
                          name, "one of " + ", ".join(ids))
                bad = True
        if bad:
            continue
        if r.from_zone == r.to_zone:
            col.error(f"{key}.to_zone", "recycle returns to the zone it leaves", r.to_zone,
                      "a zone other than from_zone")
            continue
        if (r.from_zone, r.to_zone) in ends:
            col.error(key, f"same ends as recycle {ends[(r.from_zone, r.to_zone)]}; merge them",
                      f"{r.from_zone} -> {r.to_zone}")
            continue
        ends[(r.from_zone, r.to_zone)] = r.id
        if index[r.to_zone] == index[r.from_zone] + 1:
            col.error(f"{key}.to_zone", "a recycle to the next zone downstream is just forward flow", r.to_zone,
                      "a zone upstream of from_zone")
        elif index[r.to_zone] > index[r.from_zone]:
            col.warn(f"{key}.to_zone", f"recycle runs downstream ({r.from_zone} -> {r.to_zone}): a bypass, "
                                       "not a recycle")
    if return_sludge is not None and return_sludge.to_zone not in index:
        col.error("flows.return_sludge.to_zone", "no such zone", return_sludge.to_zone, "one of " + ", ".join(ids))
    if col.count > before:
        return  # the flows below assume the references are sound
    flow = list(influent_flow)
    n = len(flow)
    fwd = forward_flows(ids, step_feed, recycles, return_sludge, flow)
    if flows_known:
        for i, z in enumerate(ids):
            bad = [p for p in range(n) if fwd[i][p] < -_TOL_m3_d]
            if bad:
                nxt = ids[i + 1] if i + 1 < len(ids) else CLARIFIER
                culprits = [r.id for r in recycles if index[r.from_zone] <= i < index[r.to_zone]]
                key = f"flows.recycles.{culprits[0]}" if culprits else zone_key(z)
                col.error(key, f"forward flow {z} -> {nxt} is negative in {len(bad)} of {n} periods "
                               f"(first period {bad[0] + 1})", round(fwd[i][bad[0]], 6), ">= 0 m3/d")
        if col.count > before:
            return  # reachability below would only repeat the negative flows
    g = flowing_subgraph(train_graph(ids, step_feed, recycles, return_sludge, wasting, flow))
    reach = nx.descendants(g, INFLUENT) if INFLUENT in g else set()
    for z in ids:
        if z not in reach:
            col.error(zone_key(z), "zone receives no flow (not reachable from the influent)", None,
                      "a step feed, recycle or return sludge into it or a zone upstream")
        elif CLARIFIER not in g or not nx.has_path(g, z, CLARIFIER):
            col.error(zone_key(z), "no flow from this zone reaches the clarifier", None,
                      "a positive forward flow downstream of it")
