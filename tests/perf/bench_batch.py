"""Many small problems: one POST /v1/batch against one request per problem.

Baselines measured in the same run:
- in-process floor: the kind's parse + solve called directly for every problem (what
  the service must do anyway, without HTTP or JSON);
- separate requests: one POST /v1/maxflow per problem over one keep-alive session.
Run: `python -m tests.perf batch` (add --quick for fewer problems).
"""

from __future__ import annotations

import orjson
import numpy as np
import requests

from service.deadline import Deadline
from service.kinds import KINDS, Limits
from tests.perf.harness import best_of, post_json, served, table


def small_problem(rng, n: int, m: int) -> dict:
    """A small random max-flow problem in object form with string ids (a typical planner call)."""
    tails, heads = rng.integers(0, n, m), rng.integers(0, n, m)
    arcs = [{"from": f"depot-{a}", "to": f"depot-{b}", "capacity": int(c)}
            for a, b, c in zip(tails, heads, rng.integers(1, 60, m))]
    arcs.append({"from": "depot-0", "to": f"depot-{n - 1}", "capacity": 1})
    return {"source": "depot-0", "sink": f"depot-{n - 1}", "arcs": arcs}


def in_process(problems: list) -> list:
    kind, limits = KINDS["maxflow"], Limits()
    return [kind.solve(kind.parse(p, limits), Deadline.after(600))["value"] for p in problems]


def separately(session, url: str, bodies: list) -> list:
    return [post_json(session, url, body)["value"] for body in bodies]


def run(args) -> None:
    count = 100 if args.quick else 500
    shapes = [(6, 10), (20, 60)]
    rows = []
    with served(workers=1) as server, requests.Session() as session:
        single_url, batch_url = server.url + "/v1/maxflow", server.url + "/v1/batch"
        warm = small_problem(np.random.default_rng(0), 6, 10)
        post_json(session, single_url, orjson.dumps(warm))
        post_json(session, batch_url, orjson.dumps({"items": [{"kind": "maxflow", "problem": warm}]}))
        for n, m in shapes:
            rng = np.random.default_rng(n * 1000 + m)
            problems = [small_problem(rng, n, m) for _ in range(count)]
            # Separate requests bypass the result cache, as batch items never use it.
            bodies = [orjson.dumps({**p, "options": {"cache": "bypass"}}) for p in problems]
            batch_body = orjson.dumps({"items": [{"kind": "maxflow", "problem": p} for p in problems]})
            expected = in_process(problems)
            assert separately(session, single_url, bodies) == expected
            answer = post_json(session, batch_url, batch_body)["results"]
            assert [r["value"] for r in answer] == expected
            floor_s = best_of(lambda: in_process(problems), repeat=3)
            single_s = best_of(lambda: separately(session, single_url, bodies), repeat=3)
            batch_s = best_of(lambda: post_json(session, batch_url, batch_body), repeat=3)
            per = lambda s: f"{s / count * 1000:.3f}"  # noqa: E731 - ms per problem
            rows.append((f"{count} x {m} arcs", per(floor_s), per(single_s), per(batch_s),
                         f"{single_s / batch_s:.1f}x", f"{batch_s / floor_s:.2f}x", f"{len(batch_body) / 1e6:.2f}"))
    table(rows, ("problems", "in-process ms/problem", "separate ms/problem", "batch ms/problem",
                 "separate / batch", "batch / in-process", "batch MB"))
    print("target: batch clearly cheaper per problem than separate requests (separate / batch well above 1)")


if __name__ == "__main__":
    import argparse

    run(argparse.Namespace(quick=False))
