"""The result cache behind POST /v1/<kind> and GET /v1/solutions, over both backends."""

from __future__ import annotations

import gzip
import io
import json

import orjson

from service.api import create_app
from tests.checkers import assert_max_flow
from tests.conftest import scenario
from tests.flowdata import depot_arcs
from tests.http import post
from tests.references import max_flow_value

DEPOTS = scenario("depots-maxflow")


def without_timing(response) -> dict:
    doc = response.get_json()
    doc.pop("timing_ms")
    return doc


def test_second_identical_request_is_a_hit_with_the_same_certified_answer(store_client):
    first = post(store_client, "/v1/maxflow", DEPOTS)
    assert first.status_code == 200 and first.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    second = post(store_client, "/v1/maxflow", DEPOTS)
    assert second.status_code == 200 and second.headers["Cache-Status"] == "sluice; hit"
    assert without_timing(second) == without_timing(first)
    doc = second.get_json()
    # Reference: networkx.maximum_flow_value; and the hit's flows are a valid maximum flow.
    assert doc["value"] == max_flow_value(DEPOTS["arcs"], DEPOTS["source"], DEPOTS["sink"])
    assert doc["certificate"]["checked"] is True
    ids = {n: i for i, n in enumerate(dict.fromkeys(x for a in DEPOTS["arcs"] for x in (a["from"], a["to"])))}
    assert_max_flow(len(ids), [ids[a["from"]] for a in DEPOTS["arcs"]], [ids[a["to"]] for a in DEPOTS["arcs"]],
                    [a["capacity"] for a in DEPOTS["arcs"]], ids[DEPOTS["source"]], ids[DEPOTS["sink"]],
                    doc["flows"], doc["value"])
    assert set(doc["timing_ms"]) == {"parse", "solve", "total"} and doc["timing_ms"]["solve"] == 0


def test_same_problem_in_another_form_hits_by_digest(store_client):
    columns = {"source": DEPOTS["source"], "sink": DEPOTS["sink"],
               "arcs": {f: [a[f] for a in DEPOTS["arcs"]] for f in ("from", "to", "capacity", "key")}}
    first = post(store_client, "/v1/maxflow", DEPOTS)
    other = post(store_client, "/v1/maxflow", columns)
    assert other.headers["Cache-Status"] == "sluice; hit"
    assert other.get_json()["digest"] == first.get_json()["digest"]
    # Reformatted bytes (spaces, key order) are another body but the same problem.
    spaced = json.dumps(dict(reversed(list(DEPOTS.items()))), indent=2).encode()
    assert post(store_client, "/v1/maxflow", spaced).headers["Cache-Status"] == "sluice; hit"


def test_a_body_one_byte_away_is_not_served_the_cached_answer(store_client):
    arcs = depot_arcs(5)
    body = {"source": "site-a0", "sink": "site-b0", "arcs": arcs}
    raw = orjson.dumps(body)
    post(store_client, "/v1/maxflow", raw)
    changed = raw.replace(b'"capacity":', b'"capacity":1', 1)  # first capacity c -> 1c
    assert changed != raw
    got = post(store_client, "/v1/maxflow", changed)
    assert got.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert got.get_json()["value"] == max_flow_value(orjson.loads(changed)["arcs"], "site-a0", "site-b0")


def test_refresh_and_bypass(store_client):
    body = {**DEPOTS, "options": {"cache": "refresh"}}
    assert post(store_client, "/v1/maxflow", body).headers["Cache-Status"] == "sluice; fwd=request; stored"
    # A body asking for refresh never takes the byte-identical fast path.
    assert post(store_client, "/v1/maxflow", body).headers["Cache-Status"] == "sluice; fwd=request; stored"
    assert post(store_client, "/v1/maxflow", DEPOTS).headers["Cache-Status"] == "sluice; hit"  # refresh stored it

    arcs = depot_arcs(6)
    fresh = {"source": "site-a0", "sink": "site-b0", "arcs": arcs, "options": {"cache": "bypass"}}
    r = post(store_client, "/v1/maxflow", fresh)
    assert r.headers["Cache-Status"] == "sluice; fwd=request; detail=bypass"
    assert post(store_client, "/v1/maxflow", fresh).headers["Cache-Status"] == "sluice; fwd=request; detail=bypass"
    assert store_client.get(f"/v1/solutions/{r.get_json()['digest']}").status_code == 404  # never stored
    use = {**fresh, "options": {"cache": "use"}}
    assert post(store_client, "/v1/maxflow", use).headers["Cache-Status"] == "sluice; fwd=miss; stored"


def test_answer_changing_options_are_separate_entries(store_client):
    full = post(store_client, "/v1/maxflow", DEPOTS).get_json()
    cut_only = post(store_client, "/v1/maxflow", {**DEPOTS, "options": {"detail": ["cut"]}})
    assert cut_only.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    doc = cut_only.get_json()
    assert doc["digest"] != full["digest"] and "flows" not in doc and doc["cut"] == full["cut"]


def test_solutions_by_digest_with_etag(store_client):
    solved = post(store_client, "/v1/maxflow", DEPOTS).get_json()
    r = store_client.get(f"/v1/solutions/{solved['digest']}")
    assert r.status_code == 200 and r.mimetype == "application/json"
    solved.pop("timing_ms")
    assert r.get_json() == solved
    etag = r.headers["ETag"]
    assert etag.startswith('"') and etag.endswith('"')
    again = store_client.get(f"/v1/solutions/{solved['digest']}", headers={"If-None-Match": etag})
    assert again.status_code == 304 and again.data == b"" and again.headers["ETag"] == etag
    other = store_client.get(f"/v1/solutions/{solved['digest']}", headers={"If-None-Match": '"nope"'})
    assert other.status_code == 200
    missing = store_client.get("/v1/solutions/sha256:" + "0" * 64)
    assert missing.status_code == 404 and missing.mimetype == "application/problem+json"
    bad = store_client.get("/v1/solutions/md5:abc")
    assert bad.status_code == 400 and bad.get_json()["errors"][0]["parameter"] == "digest"


def test_bad_requests_are_not_cached(store_client):
    bad = {**DEPOTS, "sink": "nowhere"}
    for _ in range(2):
        r = post(store_client, "/v1/maxflow", bad)
        assert r.status_code == 422 and r.get_json()["errors"][0]["pointer"] == "/sink"
    assert post(store_client, "/v1/maxflow", b"{not json").status_code == 400
    r = store_client.post("/v1/maxflow", data=orjson.dumps(DEPOTS), content_type="text/plain")
    assert r.status_code == 415  # a cached body does not excuse the wrong media type
    post(store_client, "/v1/maxflow", DEPOTS)
    r = store_client.post("/v1/maxflow", data=orjson.dumps(DEPOTS), content_type="text/plain")
    assert r.status_code == 415


def test_two_apps_on_one_store_share_results(store_config):
    a, b = create_app(store_config).test_client(), create_app(store_config).test_client()
    assert post(a, "/v1/maxflow", DEPOTS).headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert post(b, "/v1/maxflow", DEPOTS).headers["Cache-Status"] == "sluice; hit"


def test_readyz_checks_the_store(store_client, store_config):
    r = store_client.get("/readyz")
    doc = r.get_json()
    assert r.status_code == 200 and doc["status"] == "ready"
    assert doc["checks"]["solver"] == "ok" and doc["checks"]["store"] == "ok"
    assert all(v == "ok" for v in doc["checks"].values())  # the job store too
    assert doc["store"]["backend"] == ("redis" if store_config.get("redis_url") else "sqlite")


def test_an_unusable_data_dir_degrades_but_solves_still_answer(tmp_path):
    blocker = tmp_path / "not-a-dir"
    blocker.write_text("a file where the data folder should be")
    client = create_app({"data_dir": str(blocker / "data")}).test_client()
    r = post(client, "/v1/maxflow", DEPOTS)
    assert r.status_code == 200 and r.headers["Cache-Status"] == "sluice; fwd=bypass; detail=store-unavailable"
    assert r.get_json()["value"] == max_flow_value(DEPOTS["arcs"], DEPOTS["source"], DEPOTS["sink"])
    ready = client.get("/readyz")
    assert ready.status_code == 200 and ready.get_json()["status"] == "degraded"
    assert ready.get_json()["checks"]["store"] == "unavailable"
    r = client.get("/v1/networks")
    assert r.status_code == 503 and r.headers["Retry-After"]


def test_answers_that_are_not_final_are_never_cached(store_app):
    """A status like time_limit (the LP kind's) must not be served to a later request
    that allows more time. A stand-in kind gives that status: the cache and store are real."""
    from types import SimpleNamespace

    from service.api import cache, storage

    calls = []
    kind = SimpleNamespace(name="stand-in", solve=lambda problem, deadline: calls.append(1) or
                           {"status": "time_limit", "digest": problem.digest},
                           size=lambda problem: problem.size, for_solver_process=None, honours_time_limit=False)
    problem = SimpleNamespace(digest="sha256:" + "c" * 64, options={"cache": "use"}, size=1)  # solved inline
    with store_app.test_request_context("/v1/stand-in", method="POST"):
        for _ in range(2):
            r = cache.answer(kind, problem, started=0.0)
            assert r.headers["Cache-Status"] == "sluice; fwd=miss; detail=not-final"
        assert calls == [1, 1]
        assert storage.get_store().get_result("public", problem.digest) is None


def test_unbounded_answers_are_cached(store_client):
    body = {"source": "dock-a", "sink": "dock-c",
            "arcs": [{"from": "dock-a", "to": "dock-b"}, {"from": "dock-b", "to": "dock-c", "capacity": None}]}
    first = post(store_client, "/v1/maxflow", body)
    assert first.get_json()["status"] == "unbounded"
    assert post(store_client, "/v1/maxflow", body).headers["Cache-Status"] == "sluice; hit"


# --- the raw-body fingerprint behind the fast path -------------------------------------


def test_body_fingerprint_is_blake3():
    from service.api.jsonio import body_fingerprint

    # The BLAKE3 hash of the empty input, from the test vectors published with the BLAKE3
    # reference implementation (recalled from memory; the library agrees).
    assert body_fingerprint(b"").hex() == "af1349b9f5f9a1a6a0404dea36dcc9499bcb25c9adc112b7cc9a93cae41f3262"
    one = __import__("random").Random(4).randbytes(3 << 20)
    other = one[:-1] + bytes([one[-1] ^ 1])  # one bit away, at the end
    assert len(body_fingerprint(one)) == 32 and body_fingerprint(one) != body_fingerprint(other)
    assert body_fingerprint(one[:5], one[5:1 << 20], one[1 << 20:]) == body_fingerprint(one)  # parts as received


class TrickleStream(io.BytesIO):
    """A WSGI input that hands out at most ``most`` bytes per read, as a socket may."""

    def __init__(self, data: bytes, most: int):
        super().__init__(data)
        self.most = most

    def read(self, size: int | None = -1) -> bytes:
        return super().read(self.most if size is None or size < 0 else min(size, self.most))


def big_body(seed: int) -> bytes:
    arcs = depot_arcs(seed, nodes=200, arcs=40_000)  # about 3 MB
    raw = orjson.dumps({"source": "site-a0", "sink": "site-b0", "arcs": arcs})
    assert len(raw) > 2 << 20
    return raw


def test_a_large_body_is_a_hit_however_its_bytes_arrive(store_client):
    raw = big_body(11)
    first = post(store_client, "/v1/maxflow", raw)
    assert first.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert first.get_json()["value"] == max_flow_value(orjson.loads(raw)["arcs"], "site-a0", "site-b0")
    for most in (len(raw), 100_000):  # in one read; in short reads, as a slow input may
        again = store_client.post("/v1/maxflow", input_stream=TrickleStream(raw, most),
                                   content_type="application/json")
        assert again.headers["Cache-Status"] == "sluice; hit", most
        assert without_timing(again) == without_timing(first)
    at = raw.rindex(b'"capacity":') + len(b'"capacity":')
    changed = raw[:at] + b"1" + raw[at:]  # the last arc's capacity c becomes 1c: another problem
    again = post(store_client, "/v1/maxflow", changed)
    assert again.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert again.get_json()["value"] == max_flow_value(orjson.loads(changed)["arcs"], "site-a0", "site-b0")


def test_a_large_body_cut_short_is_refused_and_nothing_is_cached(store_client):
    raw = big_body(12)
    cut = store_client.post("/v1/maxflow", input_stream=TrickleStream(raw[:-1000], 100_000),
                            content_type="application/json", environ_overrides={"CONTENT_LENGTH": str(len(raw))})
    assert cut.status_code == 400 and "ended after" in cut.get_json()["detail"]
    assert post(store_client, "/v1/maxflow", raw).headers["Cache-Status"] == "sluice; fwd=miss; stored"


def test_a_gzipped_hit_is_the_whole_answer_gzipped(store_client):
    """A hit compresses only what follows its cached start (service.api.encoding); the
    bytes sent must be those of compressing the whole answer at once."""
    from service.api.encoding import _gzip

    raw = orjson.dumps({"source": "site-a0", "sink": "site-b0", "arcs": depot_arcs(5, nodes=60, arcs=3000)})
    first = post(store_client, "/v1/maxflow", raw)
    assert first.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    for _ in range(3):
        hit = store_client.post("/v1/maxflow", data=raw, content_type="application/json",
                                headers={"Accept-Encoding": "gzip"})
        assert hit.headers["Cache-Status"] == "sluice; hit" and hit.headers["Content-Encoding"] == "gzip"
        plain = gzip.decompress(hit.data)
        assert hit.data == _gzip(plain)
        doc = orjson.loads(plain)
        doc.pop("timing_ms")
        assert doc == without_timing(first)


def test_stable_starts_follow_a_changed_start_and_keep_to_their_budget():
    from service.api.encoding import StableStarts, _gzip

    starts = StableStarts(budget=8 * StableStarts.STATE_BYTES)
    rng = __import__("random").Random(2)
    one = b'{"flows":[' + b",".join(str(rng.randrange(9)).encode() for _ in range(20_000))
    other = one.replace(b"7", b"8")  # a refreshed answer under the same key
    for start in (one, other, one):
        for tail in (b',"timing_ms":{"total":0.1}}', b',"timing_ms":{"total":12.25}}'):
            assert starts.gzip(start + tail, "k", len(start)) == _gzip(start + tail)
    for i in range(10):
        starts.gzip(one + b"}", f"key-{i}", len(one))
    assert 0 < starts.size <= starts.budget and len(starts._entries) < 10
