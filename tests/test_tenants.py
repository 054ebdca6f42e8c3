"""Stored networks and cached solutions are visible to their own tenant only."""


from service.api import create_app
from service.config import parse_api_keys
from tests.conftest import scenario

DEPOTS = scenario("depots-maxflow")


def bearer(key: str) -> dict:
    return {"Authorization": f"Bearer {key}"}


def test_networks_and_solutions_are_kept_apart_by_tenant(tmp_path):
    keys = parse_api_keys("depot-north:north-key-1,depot-south:south-key-1")
    client = create_app({"data_dir": str(tmp_path), "api_keys": keys, "rate_limit": "off"}).test_client()
    north, south = bearer("north-key-1"), bearer("south-key-1")

    assert client.put("/v1/networks/lanes", json={"arcs": DEPOTS["arcs"]}, headers=north).status_code == 201
    assert client.get("/v1/networks/lanes", headers=north).status_code == 200
    assert client.get("/v1/networks/lanes", headers=south).status_code == 404
    assert client.get("/v1/networks", headers=south).get_json()["networks"] == []
    # The other tenant may use the same name for a network of its own.
    assert client.put("/v1/networks/lanes", json={"arcs": DEPOTS["arcs"][:3]}, headers=south).status_code == 201
    assert client.get("/v1/networks/lanes", headers=north).get_json()["arc_count"] == 9

    digest = client.post("/v1/maxflow", json=DEPOTS, headers=north).get_json()["digest"]
    assert client.get(f"/v1/solutions/{digest}", headers=north).status_code == 200
    assert client.get(f"/v1/solutions/{digest}", headers=south).status_code == 404
    # The same problem asked by the other tenant is solved for it, not served from the first's cache.
    r = client.post("/v1/maxflow", json=DEPOTS, headers=south)
    assert r.status_code == 200 and r.headers["Cache-Status"] == "sluice; fwd=miss; stored"
    assert client.post("/v1/maxflow", json=DEPOTS).status_code == 401
