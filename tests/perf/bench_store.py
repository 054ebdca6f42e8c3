"""Result cache and stored networks: hit vs cold at 100k arcs, what-if vs full post at 1M arcs.

Both backends (the embedded SQLite store and Redis on 127.0.0.1:6379, under a private
key prefix that is deleted afterwards), each against a real `sluice serve` with one
worker. Every ratio compares two end-to-end HTTP timings measured in the same run:

- hit / cold: the same 100k-arc object-form body posted a second time, against its
  first post (parse, solve, store). Target <= 0.10.
- what-if / full post: POST /v1/networks/{name}/maxflow with two changes, against
  posting the whole changed 1M-arc network to /v1/maxflow (a cache miss too: every
  repetition changes another arc). Target <= 0.33.
"""

from __future__ import annotations

import statistics
import tempfile
import time
import uuid

import numpy as np
import orjson
import requests

from tests.conftest import REDIS_URL, redis_problem
from tests.perf.harness import served, table


def depot_body(arcs: int, seed: int) -> dict:
    """An invented network of sites and lanes, in object form with string ids and keys."""
    rng = np.random.default_rng(seed)
    nodes = max(10, arcs // 5)
    tails = rng.integers(0, nodes, arcs).tolist()
    heads = rng.integers(0, nodes, arcs).tolist()
    caps = rng.integers(1, 100, arcs).tolist()
    names = [f"site-{i}" for i in range(nodes)]
    return {"source": names[0], "sink": names[-1],
            "arcs": [{"from": names[t], "to": names[h], "capacity": c, "key": f"lane-{i}"}
                     for i, (t, h, c) in enumerate(zip(tails, heads, caps))]}


def timed_post(session, url, body: bytes) -> tuple[float, str, dict]:
    """(seconds until the whole response arrived, its Cache-Status, its decoded body)."""
    t0 = time.perf_counter()
    r = session.post(url, data=body, headers={"Content-Type": "application/json"}, timeout=600)
    elapsed = time.perf_counter() - t0
    if r.status_code != 200:
        raise RuntimeError(f"{url}: {r.status_code} {r.text[:300]}")
    return elapsed, r.headers.get("Cache-Status", ""), orjson.loads(r.content)


def bench_hits(server, arcs: int, repeat: int) -> list[tuple]:
    session = requests.Session()
    cold, hit = [], []
    for seed in range(repeat):
        body = orjson.dumps(depot_body(arcs, 1000 + seed))
        t_cold, status, first = timed_post(session, server.url + "/v1/maxflow", body)
        assert status == "sluice; fwd=miss; stored", status
        for _ in range(3):
            t_hit, status, again = timed_post(session, server.url + "/v1/maxflow", body)
            assert status == "sluice; hit" and again["digest"] == first["digest"], status
            hit.append(t_hit)
        cold.append(t_cold)
    c, h = statistics.median(cold), statistics.median(hit)
    return [(f"cold post, {arcs // 1000}k arcs", f"{c * 1000:.1f}", ""),
            ("hit, same body", f"{h * 1000:.1f}", f"{h / c:.3f} (target <= 0.10)")]


def bench_what_if(server, arcs: int, repeat: int) -> list[tuple]:
    session = requests.Session()
    doc = depot_body(arcs, 7)
    raw = orjson.dumps({"arcs": doc["arcs"]})
    t0 = time.perf_counter()
    r = session.put(server.url + "/v1/networks/bench", data=raw, headers={"Content-Type": "application/json"},
                    timeout=600)
    t_put = time.perf_counter() - t0
    assert r.status_code in (200, 201), r.text[:300]
    rng = np.random.default_rng(3)
    base = doc["arcs"]
    full, first_what_if, what_if = [], None, []
    for rep in range(repeat + 1):
        i, j = (int(x) for x in rng.choice(arcs, size=2, replace=False))
        cap = int(rng.integers(0, 100))
        changes = [{"key": f"lane-{i}", "closed": True}, {"arc": j, "capacity": cap}]
        query = orjson.dumps({"source": doc["source"], "sink": doc["sink"], "changes": changes})
        t_w, status, answer = timed_post(session, server.url + "/v1/networks/bench/maxflow", query)
        assert status == "sluice; fwd=miss; stored", status
        if rep == 0:
            first_what_if = t_w  # includes fetching and decoding the stored arrays once
            continue
        what_if.append(t_w)
        # The same question posted in full, cold (cache=bypass: the what-if just stored it).
        changed = list(base)
        changed[i] = {**base[i], "capacity": 0}
        changed[j] = {**base[j], "capacity": cap}
        body = orjson.dumps({"source": doc["source"], "sink": doc["sink"], "arcs": changed,
                             "options": {"cache": "bypass"}})
        t_f, status, direct = timed_post(session, server.url + "/v1/maxflow", body)
        assert status == "sluice; fwd=request; detail=bypass", status
        assert direct["value"] == answer["value"] and direct["digest"] == answer["digest"]
        full.append(t_f)
    f, w = statistics.median(full), statistics.median(what_if)
    return [(f"PUT network, {arcs // 1000}k arcs", f"{t_put * 1000:.0f}", ""),
            ("full post of the changed network", f"{f * 1000:.0f}", ""),
            ("what-if, first (loads the arrays)", f"{first_what_if * 1000:.0f}", f"{first_what_if / f:.3f}"),
            ("what-if, next (arrays in memory)", f"{w * 1000:.0f}", f"{w / f:.3f} (target <= 0.33)")]


def backends() -> list[tuple[str, dict]]:
    out = [("sqlite", {"SLUICE_REDIS_URL": ""})]
    problem = redis_problem(REDIS_URL)
    if problem:
        print(f"redis: skipped ({problem})")
    else:
        out.append(("redis", {"SLUICE_REDIS_URL": REDIS_URL, "SLUICE_REDIS_PREFIX": f"sluice-bench:{uuid.uuid4().hex[:8]}:"}))
    return out


def cleanup(env: dict) -> None:
    if not env.get("SLUICE_REDIS_URL"):
        return
    import redis

    client = redis.Redis.from_url(env["SLUICE_REDIS_URL"])
    keys = list(client.scan_iter(match=env["SLUICE_REDIS_PREFIX"] + "*", count=1000))
    for i in range(0, len(keys), 500):
        client.unlink(*keys[i:i + 500])


def run(args) -> None:
    hit_arcs, big_arcs, repeat = (10_000, 100_000, 2) if args.quick else (100_000, 1_000_000, 3)
    rows = []
    for name, env in backends():
        with tempfile.TemporaryDirectory() as data:
            try:
                with served(workers=1, env=env, data_dir=data) as server:
                    for row in bench_hits(server, hit_arcs, repeat) + bench_what_if(server, big_arcs, repeat):
                        rows.append((name, *row))
            finally:
                cleanup(env)
    table(rows, ("backend", "request", "median ms", "ratio"))
