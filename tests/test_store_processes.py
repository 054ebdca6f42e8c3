"""The store across processes: two servers on one folder, restarts, a killed writer,
and Redis going away and coming back."""

from __future__ import annotations

import json
import random
import subprocess
import sys
import threading
import time

import orjson
import pytest
import requests

from service.api import create_app
from service.errors import NotFound
from service.store import network_digest, open_store
from tests.conftest import ROOT, RunningServer, scenario
from tests.flowdata import depot_arcs
from tests.references import max_flow_value

DEPOTS = scenario("depots-maxflow")
EMBEDDED = {"SLUICE_REDIS_URL": ""}  # whatever the caller's environment says


@pytest.mark.server
def test_two_servers_share_one_data_folder_and_a_restart_keeps_it(tmp_path):
    data = str(tmp_path / "data")
    a = RunningServer(env=EMBEDDED, workers=1, data_dir=data)
    try:
        b = RunningServer(env=EMBEDDED, workers=1, data_dir=data)
        try:
            first = a.post("/v1/maxflow", json=DEPOTS, timeout=30)
            assert first.headers["Cache-Status"] == "sluice; fwd=miss; stored"
            second = b.post("/v1/maxflow", json=DEPOTS, timeout=30)
            assert second.headers["Cache-Status"] == "sluice; hit"
            assert second.json()["digest"] == first.json()["digest"]
            assert second.json()["value"] == max_flow_value(DEPOTS["arcs"], DEPOTS["source"], DEPOTS["sink"])
            put = b.put("/v1/networks/depots", json={"arcs": DEPOTS["arcs"]}, timeout=30)
            assert put.status_code == 201
            what_if = a.post("/v1/networks/depots/maxflow", timeout=30,
                                    json={"source": DEPOTS["source"], "sink": DEPOTS["sink"],
                                          "changes": [{"key": "lane-08", "closed": True}]})
            assert what_if.status_code == 200 and what_if.json()["network"]["version"] == 1
            _race_conditional_puts([a.url, b.url], put.headers["ETag"])
        finally:
            b.stop()
    finally:
        a.stop()
    c = RunningServer(env=EMBEDDED, workers=2, data_dir=data)
    try:
        kept = c.get(f"/v1/solutions/{first.json()['digest']}", timeout=30)
        assert kept.status_code == 200 and kept.json()["value"] == first.json()["value"]
        assert c.post("/v1/maxflow", json=DEPOTS, timeout=30).headers["Cache-Status"] == "sluice; hit"
        net = c.get("/v1/networks/depots", timeout=30)
        assert net.status_code == 200 and net.json()["version"] == 2
        assert c.get("/readyz", timeout=30).json()["status"] == "ready"
    finally:
        c.stop()


def _race_conditional_puts(urls: list[str], etag: str) -> None:
    """Writers on two server processes PUT with the same If-Match at once: one 200, the rest 412."""
    bodies = [{"arcs": DEPOTS["arcs"][:k]} for k in range(3, 9)]
    barrier = threading.Barrier(len(bodies))
    codes: dict = {}

    def writer(k):
        barrier.wait()
        r = requests.put(f"{urls[k % 2]}/v1/networks/depots", json=bodies[k], headers={"If-Match": etag}, timeout=60)
        codes[k] = r.status_code

    threads = [threading.Thread(target=writer, args=(k,)) for k in range(len(bodies))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    winners = [k for k, code in codes.items() if code == 200]
    assert len(winners) == 1 and sorted(codes.values()) == [200] + [412] * (len(bodies) - 1)
    now = requests.get(f"{urls[0]}/v1/networks/depots", timeout=30).json()
    # Nothing lost: the stored version is the winner's body, whole.
    assert now["version"] == 2 and now["arc_count"] == len(bodies[winners[0]]["arcs"])


def _check_consistent(config: dict) -> int:
    """Every stored network decodes to its recorded digest; results decode; totals agree."""
    store = open_store(**config)
    metas = store.list_networks("public", None, 100)
    for meta in metas:
        loaded = store.load_network("public", meta.name)  # checks the CRC-32 too
        assert network_digest(loaded.network) == meta.digest
        assert loaded.meta == meta
    results = 0
    for n in range(7):
        value = store.get_result("public", f"sha256:{n:064x}")
        if value is not None:
            doc = orjson.loads(value)
            assert len(doc["payload"]) == 2_000_000
            results += 1
    if store.kind == "sqlite":
        conn = store.backend._conn()
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        (total, count), = conn.execute("SELECT coalesce(sum(size), 0), count(*) FROM results").fetchall()
        assert conn.execute("SELECT bytes, entries FROM stats").fetchone() == (total, count)
        orphans = conn.execute("SELECT count(*) FROM aliases a WHERE NOT EXISTS "
                               "(SELECT 1 FROM results r WHERE r.tenant = a.tenant AND r.digest = a.digest)")
        assert orphans.fetchone()[0] == 0
    else:
        client, prefix = store.backend.client, config["redis_prefix"]
        hashes = {k.decode()[len(prefix + "public:n:"):] for k in client.scan_iter(match=prefix + "public:n:*")}
        assert hashes == {m.name for m in metas}
        for name in hashes:
            assert set(client.hkeys(f"{prefix}public:n:{name}")) == {b"meta", b"blob"}
    # And it is still writable.
    net = loaded.network if metas else None
    if net is not None:
        assert store.put_network("public", "after-crash", net, network_digest(net))[0].version >= 1
    store.close()
    return len(metas) + results


def test_a_writer_killed_mid_write_leaves_the_store_readable_and_consistent(store_config):
    """kill -9 a writer inside a network write (odd writes are ~5 MB network versions, see
    tests/store_writer.py): every completed write is there, the interrupted one is there
    whole or not at all, and everything decodes."""
    rng = random.Random(5)
    completed: dict = {}
    sqlite = not store_config.get("redis_url")
    for round_ in range(3 if sqlite else 2):
        target = 2 * rng.randint(2, 4) + 1
        # SQLite, last round: the writer kills itself at a known point inside the INSERT.
        self_kill = sqlite and round_ == 2
        extra = [str(target), str(rng.randint(31, 95))] if self_kill else []
        proc = subprocess.Popen([sys.executable, "-m", "tests.store_writer", json.dumps(store_config), *extra],
                                cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        pending = None  # the network write begun and not yet reported done

        def account(line: bytes) -> None:
            nonlocal pending
            word, n = line.split()
            n = int(n)
            if n % 2 == 0:
                return
            if word == b"begin":
                pending = f"crash-{n % 3}"
            elif word == b"done":
                completed[f"crash-{n % 3}"] = completed.get(f"crash-{n % 3}", 0) + 1
                pending = None

        try:
            for line in proc.stdout:
                account(line)
                word, n = line.split()
                if word == b"begin" and int(n) >= target:
                    if self_kill:
                        proc.wait(timeout=60)
                        break
                    time.sleep(rng.uniform(0.002, 0.02))  # somewhere inside the write
                    break
            else:
                pytest.fail(f"the writer stopped on its own: {proc.stderr.read().decode()[-2000:]}")
        finally:
            proc.kill()
            proc.wait()
        # A fast backend may finish more writes during the sleep: count what it reported.
        for line in proc.stdout.read().splitlines():
            account(line)
        interrupted = pending
        assert proc.returncode == -9
        assert _check_consistent(store_config) > 0
        store = open_store(**store_config)
        for name, count in completed.items():
            version = store.network_meta("public", name).version
            if self_kill and name == interrupted:
                assert version == count  # killed before COMMIT: rolled back on the next open
            assert version in ((count, count + 1) if name == interrupted else (count,))
            completed[name] = version  # the interrupted write may have landed whole
        if interrupted is not None and interrupted not in completed:  # its first write was interrupted
            try:
                completed[interrupted] = store.network_meta("public", interrupted).version
                assert not self_kill and completed[interrupted] == 1
            except NotFound:
                pass
        store.close()


@pytest.mark.redis
def test_redis_stopped_and_started_answers_stay_correct(private_redis, tmp_path, caplog):
    app = create_app({"data_dir": str(tmp_path / "data"), "redis_url": private_redis.url,
                      "redis_prefix": "sluice-test:", "store_retry": 0.2})
    client = app.test_client()
    arcs = depot_arcs(11)
    body = {"source": "site-a0", "sink": "site-c0", "arcs": arcs}
    expected = max_flow_value(arcs, "site-a0", "site-c0")  # reference: networkx

    def solve(b=body):
        r = client.post("/v1/maxflow", json=b)
        assert r.status_code == 200
        return r

    assert solve().headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert solve().headers["Cache-Status"] == "sluice; hit"
    assert client.put("/v1/networks/lanes", json={"arcs": arcs}).status_code == 201

    private_redis.stop()
    caplog.set_level("WARNING", logger="sluice.store")
    for _ in range(3):
        r = solve()
        assert r.headers["Cache-Status"] == "sluice; fwd=bypass; detail=store-unavailable"
        assert r.get_json()["value"] == expected
    other = {**body, "sink": "site-d0"}
    assert solve(other).get_json()["value"] == max_flow_value(arcs, "site-a0", "site-d0")
    assert any("unavailable" in r.getMessage() for r in caplog.records if r.name == "sluice.store")
    ready = client.get("/readyz")
    assert ready.status_code == 200 and ready.get_json()["status"] == "degraded"
    net = client.get("/v1/networks/lanes")
    assert net.status_code == 503 and net.mimetype == "application/problem+json" and net.headers["Retry-After"]

    private_redis.start()  # an empty Redis: no persistence configured
    time.sleep(0.3)  # past the breaker's retry interval
    assert client.get("/readyz").get_json()["status"] == "ready"
    assert any("reachable again" in r.getMessage() for r in caplog.records if r.name == "sluice.store")
    r = solve()
    assert r.headers["Cache-Status"] == "sluice; fwd=miss; stored" and r.get_json()["value"] == expected
    r = solve()
    assert r.headers["Cache-Status"] == "sluice; hit" and r.get_json()["value"] == expected
    assert client.get("/v1/networks/lanes").status_code == 404  # that Redis lost it; no stale memo served
