"""The store package over both backends: the embedded SQLite file and the real Redis."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from service.errors import NotFound, PreconditionFailed
from service.model.arcs import build_network, read_arcs
from service.model.nodes import read_nodes
from service.store import (CorruptNetwork, Preconditions, decode_network, encode_network, network_digest,
                           open_store)
from service.store.errors import InvalidParameter
from service.store.names import check_name
from tests.flowdata import depot_arcs

DIGEST_A = "sha256:" + "a" * 64
DIGEST_B = "sha256:" + "b" * 64


@pytest.fixture
def store(store_config):
    s = open_store(**store_config)
    yield s
    s.close()


def network_of(arcs, nodes=None):
    return build_network(read_arcs(arcs), read_nodes(nodes).ids, allow_lower=True)


def put(store, name, arcs, pre=Preconditions(), tenant="public"):
    net = network_of(arcs)
    return store.put_network(tenant, name, net, network_digest(net), pre)


# -- results -----------------------------------------------------------------------

def test_results_round_trip_per_tenant(store):
    assert store.get_result("public", DIGEST_A) is None
    assert store.put_result("public", DIGEST_A, b'{"value": 1}', body_key="body-1")
    assert store.get_result("public", DIGEST_A) == b'{"value": 1}'
    assert store.get_result_by_body("public", "body-1") == b'{"value": 1}'
    assert store.get_result("tenant-2", DIGEST_A) is None  # namespaced by tenant
    assert store.get_result_by_body("tenant-2", "body-1") is None
    store.put_alias("public", "body-2", DIGEST_A)  # a second body form of the same problem
    assert store.get_result_by_body("public", "body-2") == b'{"value": 1}'
    assert store.put_result("public", DIGEST_A, b'{"value": 2}')  # refresh overwrites
    assert store.get_result("public", DIGEST_A) == b'{"value": 2}'


def test_results_over_the_item_limit_are_not_cached(store_config):
    s = open_store(**store_config, max_item_bytes=100)
    assert s.put_result("public", DIGEST_A, b"x" * 101) is False
    assert s.get_result("public", DIGEST_A) is None
    s.close()


def test_sqlite_evicts_least_recently_used_within_budget(tmp_path):
    s = open_store(data_dir=str(tmp_path), cache_bytes=10_000, max_item_bytes=10_000)
    s.backend.touch_interval = 0  # every hit counts, for this test
    digests = [f"sha256:{i:064x}" for i in range(12)]
    for d in digests[:8]:
        assert s.put_result("public", d, b"x" * 1000, body_key=d[-8:])
    assert s.get_result("public", digests[0]) is not None  # digest 0 is now the most recently used
    for d in digests[8:]:
        s.put_result("public", d, b"x" * 1000)
    info = s.health()
    assert info["result_bytes"] <= 10_000
    assert s.get_result("public", digests[0]) is not None
    assert s.get_result("public", digests[1]) is None  # least recently used: evicted
    assert s.get_result_by_body("public", digests[1][-8:]) is None  # its alias went with it
    assert s.get_result("public", digests[-1]) is not None
    conn = s.backend._conn()
    (total, count), = conn.execute("SELECT coalesce(sum(size), 0), count(*) FROM results").fetchall()
    assert (info["result_bytes"], info["results"]) == (total, count)  # the trigger-kept totals agree
    s.close()


@pytest.mark.redis
def test_redis_results_carry_a_ttl_and_networks_none(redis_url, redis_prefix):
    # Redis evicts by TTL and its own maxmemory-policy, not by a budget of ours.
    s = open_store(redis_url=redis_url, redis_prefix=redis_prefix, cache_ttl=600)
    s.put_result("public", DIGEST_A, b"{}", body_key="k")
    put(s, "lanes", depot_arcs(1))
    client = s.backend.client
    prefix = redis_prefix
    assert 0 < client.ttl(f"{prefix}public:r:{DIGEST_A}") <= 600
    assert 0 < client.ttl(f"{prefix}public:b:k") <= 600
    assert client.ttl(f"{prefix}public:n:lanes") == -1  # never evicted under volatile-* policies
    s.close()


@pytest.mark.redis
def test_redis_a_hit_by_body_resets_both_ttls(redis_url, redis_prefix):
    """Sliding TTLs: a result asked for by its body stays, and so does the alias to it."""
    s = open_store(redis_url=redis_url, redis_prefix=redis_prefix, cache_ttl=600)
    s.put_result("public", DIGEST_A, b'{"value": 1}', body_key="k")
    client = s.backend.client
    for key in (f"{redis_prefix}public:r:{DIGEST_A}", f"{redis_prefix}public:b:k"):
        client.expire(key, 5)
    assert s.get_result_by_body("public", "k") == b'{"value": 1}'
    assert client.ttl(f"{redis_prefix}public:r:{DIGEST_A}") > 5
    assert client.ttl(f"{redis_prefix}public:b:k") > 5
    client.delete(f"{redis_prefix}public:r:{DIGEST_A}")  # evicted: the alias leads nowhere
    assert s.get_result_by_body("public", "k") is None
    s.close()


# -- networks ----------------------------------------------------------------------

def test_network_versions_and_preconditions(store):
    meta, created = put(store, "north", depot_arcs(1))
    assert created and meta.version == 1
    meta2, created = put(store, "north", depot_arcs(2))
    assert not created and meta2.version == 2 and meta2.etag != meta.etag and meta2.created == meta.created
    with pytest.raises(PreconditionFailed):
        put(store, "north", depot_arcs(3), Preconditions(if_match=frozenset({meta.etag})))
    with pytest.raises(PreconditionFailed):
        put(store, "north", depot_arcs(3), Preconditions(if_none_match="*"))
    with pytest.raises(PreconditionFailed):
        put(store, "south", depot_arcs(3), Preconditions(if_match="*"))
    assert store.network_meta("public", "north") == meta2  # failed writes changed nothing
    with pytest.raises(NotFound):
        store.network_meta("public", "south")
    meta3, _ = put(store, "north", depot_arcs(3), Preconditions(if_match=frozenset({meta2.etag})))
    assert meta3.version == 3
    with pytest.raises(PreconditionFailed):
        store.delete_network("public", "north", Preconditions(if_match=frozenset({meta2.etag})))
    assert store.delete_network("public", "north", Preconditions(if_match=frozenset({meta3.etag}))).version == 3
    with pytest.raises(NotFound):
        store.delete_network("public", "north")
    with pytest.raises(NotFound):
        store.load_network("public", "north")


def test_networks_come_back_as_stored(store):
    arcs = depot_arcs(4, unlimited_share=0.2)
    net = network_of(arcs, nodes=["site-isolated"])
    meta, _ = store.put_network("public", "east", net, network_digest(net))
    loaded = store.load_network("public", "east")
    got = loaded.network
    assert network_digest(got) == meta.digest == network_digest(net)
    assert got.nodes.ids == net.nodes.ids and got.keys == net.keys
    assert np.array_equal(got.unlimited, net.unlimited) and np.array_equal(got.capacity, net.capacity)
    assert loaded.key_index()["lane-7"] == 7
    assert store.load_network("public", "east") is loaded  # the memo, while the ETag is current
    put(store, "east", arcs[:5])
    assert store.load_network("public", "east").network.num_arcs == 5  # a new version is seen at once


def test_networks_are_namespaced_by_tenant(store):
    put(store, "shared-name", depot_arcs(1), tenant="tenant-a")
    put(store, "shared-name", depot_arcs(2)[:3], tenant="tenant-b")
    assert store.load_network("tenant-a", "shared-name").network.num_arcs == 40
    assert store.load_network("tenant-b", "shared-name").network.num_arcs == 3
    assert [m.name for m in store.list_networks("public")] == []


def test_listing_pages_in_name_order(store):
    for name in ["delta", "alpha", "echo", "bravo", "charlie"]:
        put(store, name, depot_arcs(1)[:2])
    first = store.list_networks("public", None, 2)
    second = store.list_networks("public", first[-1].name, 2)
    third = store.list_networks("public", second[-1].name, 2)
    assert [m.name for m in first + second + third] == ["alpha", "bravo", "charlie", "delta", "echo"]


def test_concurrent_conditional_puts_have_exactly_one_winner(store):
    meta, _ = put(store, "contested", depot_arcs(1))
    outcomes: list = []
    barrier = threading.Barrier(8)

    def writer(i):
        net = network_of(depot_arcs(100 + i))
        barrier.wait()
        try:
            won, _ = store.put_network("public", "contested", net, network_digest(net),
                                       Preconditions(if_match=frozenset({meta.etag})))
            outcomes.append(("won", i, won))
        except PreconditionFailed:
            outcomes.append(("412", i, None))

    threads = [threading.Thread(target=writer, args=(i,)) for i in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    winners = [o for o in outcomes if o[0] == "won"]
    assert len(winners) == 1 and len(outcomes) == 8
    current = store.network_meta("public", "contested")
    assert current.version == 2 and current == winners[0][2]
    # Nothing lost: the stored content is exactly the winner's network.
    assert current.digest == network_digest(network_of(depot_arcs(100 + winners[0][1])))


def test_concurrent_unconditional_puts_all_land_as_distinct_versions(store):
    put(store, "busy", depot_arcs(1))
    versions: list = []

    def writer(i):
        net = network_of(depot_arcs(200 + i))
        versions.append(store.put_network("public", "busy", net, network_digest(net))[0].version)

    threads = [threading.Thread(target=writer, args=(i,)) for i in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert sorted(versions) == [2, 3, 4, 5, 6, 7]
    assert store.network_meta("public", "busy").version == 7


def test_health_reports_the_backend(store, store_config):
    info = store.health()
    assert info["status"] == "ok"
    assert info["backend"] == ("redis" if store_config.get("redis_url") else "sqlite")


# -- names and codec -----------------------------------------------------------------

@pytest.mark.parametrize("name", ["", "-lead", "has space", "semi:colon", "slash/x", "ü", "x" * 129])
def test_bad_names_are_refused(name):
    with pytest.raises(InvalidParameter):
        check_name(name)


@pytest.mark.parametrize("name", ["a", "depots-north.v2", "A_1", "x" * 128])
def test_good_names_pass(name):
    assert check_name(name) == name


def test_codec_round_trips_integer_ids_costs_and_lower_bounds():
    arcs = {"from": [5, 9, 5], "to": [9, 12, 12], "capacity": [3.5, None, 2], "cost": [1, -2, 0], "lower": [0, 1, 0]}
    net = network_of(arcs, nodes=[40])
    got = decode_network(encode_network(net))
    assert got.nodes.kind is int and got.nodes.ids == [40, 5, 9, 12]
    for name in ("tail", "head", "capacity", "unlimited", "cost", "lower"):
        assert np.array_equal(getattr(got, name), getattr(net, name))
        assert getattr(got, name).dtype == getattr(net, name).dtype
    assert got.keys is None and network_digest(got) == network_digest(net)


def test_codec_detects_damage():
    blob = bytearray(encode_network(network_of(depot_arcs(1))))
    blob[-20] ^= 0xFF
    with pytest.raises(CorruptNetwork):
        decode_network(bytes(blob))
    with pytest.raises(CorruptNetwork):
        decode_network(b"not a network")
