"""A process that writes to a store until it is killed (for the crash test).

``python -m tests.store_writer '<open_store kwargs as JSON>'`` prints ``begin <n>``
before and ``done <n>`` after every write, so the test can kill it mid-write.
"""

from __future__ import annotations

import sys

import numpy as np
import orjson

from service.model.arcs import build_network, read_arcs
from service.model.nodes import read_nodes
from service.store import network_digest, open_store


def big_network(seed: int, arcs: int = 150_000):
    rng = np.random.default_rng(seed)
    columns = {"from": rng.integers(0, arcs // 4, arcs).tolist(), "to": rng.integers(0, arcs // 4, arcs).tolist(),
               "capacity": rng.integers(0, 1000, arcs).tolist(), "key": [f"lane-{seed}-{i}" for i in range(arcs)]}
    return build_network(read_arcs(columns), read_nodes(None).ids)


def main() -> None:
    store = open_store(**orjson.loads(sys.argv[1]))
    networks = [big_network(s) for s in range(2)]
    digests = [network_digest(n) for n in networks]
    n = 0
    while True:
        n += 1
        print(f"begin {n}", flush=True)
        if n % 2:
            net = networks[n % 4 // 2]
            store.put_network("public", f"crash-{n % 3}", net, digests[n % 4 // 2])
        else:
            value = orjson.dumps({"n": n, "payload": "x" * 2_000_000})
            store.put_result("public", f"sha256:{n % 7:064x}", value, body_key=f"body-{n}")
        print(f"done {n}", flush=True)


if __name__ == "__main__":
    main()
