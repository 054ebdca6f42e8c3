"""A process that writes to a store until it is killed (for the crash test).

``python -m tests.store_writer '<open_store kwargs as JSON>' [<write> <step>]`` prints
``begin <n>`` before and ``done <n>`` after every write, so the test can kill it
mid-write. With ``<write> <step>`` (SQLite only) the process SIGKILLs itself from inside
write number ``<write>``: SQLite's progress handler runs between virtual-machine steps,
and step ``<step>`` of a network write lies inside its INSERT, after BEGIN and before
COMMIT, while the ~5 MB blob spills pages into the write-ahead log.
"""

from __future__ import annotations

import dataclasses
import os
import signal
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


def variant(network, n: int):
    """Another content for each write (identical content would keep its version): the
    first capacity names the process and the write."""
    capacity = network.capacity.copy()
    capacity[0] = 1_000_000 * (os.getpid() % 1000) + n
    return dataclasses.replace(network, capacity=capacity)


def main() -> None:
    store = open_store(**orjson.loads(sys.argv[1]))
    networks = [big_network(s) for s in range(2)]
    kill_write, kill_step = (int(sys.argv[2]), int(sys.argv[3])) if len(sys.argv) > 3 else (None, None)
    n = 0
    while True:
        n += 1
        print(f"begin {n}", flush=True)
        if n == kill_write:
            steps = [0]

            def progress():
                steps[0] += 1
                if steps[0] >= kill_step:
                    os.kill(os.getpid(), signal.SIGKILL)
                return 0

            store.backend._conn().set_progress_handler(progress, 1)
        if n % 2:
            net = variant(networks[n % 4 // 2], n)
            store.put_network("public", f"crash-{n % 3}", net, network_digest(net))
        else:
            value = orjson.dumps({"n": n, "payload": "x" * 2_000_000})
            store.put_result("public", f"sha256:{n % 7:064x}", value, body_key=f"body-{n}")
        print(f"done {n}", flush=True)


if __name__ == "__main__":
    main()
