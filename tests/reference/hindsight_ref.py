"""Independent reference for pairflow's hindsight optimum (SPEC section 4).

Reads a JSON object from stdin: {"cases": [{"config": {...}, "events": [...]}, ...]}
where each event is a validated pairflow event (type, id, market, t, until, lat/lon
or x/y, has, needs, side), in file order. Prints one JSON object per case with the
hindsight cost and the match ceiling, per market and in total.

It shares no code with pairflow: occurrences (SPEC section 1), distances, allowed
pairs, time overlap and costs are written here from the spec text, and the
assignment is solved by scipy.optimize.linear_sum_assignment on the dense square
augmented matrix; the ceiling by scipy.sparse.csgraph.maximum_bipartite_matching.
"""
import json
import math
import sys

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching

RADIUS_KM = 6371.0088  # IUGG mean Earth radius, as SPEC section 2 fixes


def patience_ms(minutes):
    return int(round(minutes * 60000))


def occurrences(events, config):
    """SPEC section 1, read as a stream in event-time order (stable by file order)."""
    order = sorted(range(len(events)), key=lambda i: (events[i]["t"], i))
    occ = []  # dicts with side, id, market, t, end, location and tags
    latest = {}  # (side, id) -> index into occ of the latest occurrence
    seen = set()  # (side, id, t) of arrivals, to spot duplicates
    for i in order:
        ev = events[i]
        kind = ev["type"]
        if kind == "withdraw":
            key = (ev["side"], ev["id"])
            j = latest.get(key)
            if j is not None and occ[j]["t"] <= ev["t"] and occ[j]["end"] >= ev["t"]:
                occ[j]["end"] = min(occ[j]["end"], ev["t"])
            continue
        key3 = (kind, ev["id"], ev["t"])
        if key3 in seen:
            continue
        seen.add(key3)
        key = (kind, ev["id"])
        j = latest.get(key)
        if j is not None and occ[j]["end"] >= ev["t"]:
            occ[j]["end"] = ev["t"]
        until = ev.get("until")
        if until is None:
            minutes = config["demandPatienceMin"] if kind == "demand" else config["supplyPatienceMin"]
            until = ev["t"] + patience_ms(minutes)
        occ.append({
            "side": kind, "id": ev["id"], "market": ev["market"], "t": ev["t"], "end": until,
            "lat": ev.get("lat"), "lon": ev.get("lon"), "x": ev.get("x"), "y": ev.get("y"),
            "has": set(ev.get("has") or []), "needs": set(ev.get("needs") or []),
        })
        latest[key] = len(occ) - 1
    return occ


def distance_km(a, b, metric):
    if metric == "euclidean":
        return math.sqrt((a["x"] - b["x"]) ** 2 + (a["y"] - b["y"]) ** 2)
    p1, p2 = math.radians(a["lat"]), math.radians(b["lat"])
    dp = p2 - p1
    dl = math.radians(b["lon"] - a["lon"])
    h = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * RADIUS_KM * math.asin(math.sqrt(min(1.0, h)))


def pair_cost(s, d, config):
    """Cost of an allowed, time-overlapping pair, or None when the pair may not be matched."""
    if not d["needs"] <= s["has"]:
        return None
    if max(s["t"], d["t"]) > min(s["end"], d["end"]):
        return None
    travel = distance_km(s, d, config["metric"]) / config["speedKmh"] * 60
    if travel > config["maxTravelMin"]:
        return None
    return travel + config["waitWeight"] * max(0, s["t"] - d["t"]) / 60000


def solve_market(demand, supply, config):
    nd, ns = len(demand), len(supply)
    penalty = config["abandonPenalty"]
    if nd == 0:
        return 0.0, 0, 0
    n = nd + ns
    # Rows: demand, then ns dummy rows. Columns: supply, then one private
    # "unmatched" column per demand. Dummy rows absorb unmatched supply (cost 0) and
    # the unmatched columns no demand takes (cost 0).
    big = math.inf
    m = np.full((n, n), big)
    pairs_r, pairs_c = [], []
    for r, d in enumerate(demand):
        for c, s in enumerate(supply):
            cost = pair_cost(s, d, config)
            if cost is not None:
                m[r, c] = cost
                pairs_r.append(r)
                pairs_c.append(c)
        m[r, ns + r] = penalty
    m[nd:, :] = 0.0
    rows, cols = linear_sum_assignment(m)
    cost = float(m[rows[:nd], cols[:nd]].sum()) if nd > 0 else 0.0
    matched = int(np.sum(cols[:nd] < ns))
    ceiling = 0
    if pairs_r:
        g = csr_matrix((np.ones(len(pairs_r)), (pairs_r, pairs_c)), shape=(nd, max(ns, 1)))
        match = maximum_bipartite_matching(g, perm_type="column")
        ceiling = int(np.sum(match >= 0))
    return cost, matched, ceiling


def solve_case(case):
    config = case["config"]
    occ = occurrences(case["events"], config)
    markets = sorted({o["market"] for o in occ})
    out = {"cost": 0.0, "ceiling": 0, "demandUnits": 0, "supplyUnits": 0, "markets": {}}
    for mk in markets:
        demand = [o for o in occ if o["market"] == mk and o["side"] == "demand"]
        supply = [o for o in occ if o["market"] == mk and o["side"] == "supply"]
        cost, matched, ceiling = solve_market(demand, supply, config)
        out["markets"][mk] = {"cost": cost, "matched": matched, "ceiling": ceiling,
                              "demandUnits": len(demand), "supplyUnits": len(supply)}
        out["cost"] += cost
        out["ceiling"] += ceiling
        out["demandUnits"] += len(demand)
        out["supplyUnits"] += len(supply)
    return out


def main():
    data = json.load(sys.stdin)
    json.dump({"scipy": __import__("scipy").__version__,
               "results": [solve_case(c) for c in data["cases"]]}, sys.stdout)


if __name__ == "__main__":
    main()
