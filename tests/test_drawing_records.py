"""Drawing records kept beside cached answers are a stored format: a record written by an
earlier version of the service still draws, identically, after an upgrade.

The records below are the bytes the service wrote before each kind declared its picture
(``Kind.picture``), copied from its result store for three scenarios: a network body with
source and sink (max flow), one with supplies (min-cost flow) and a flow over time's
drawn form."""

from __future__ import annotations

import pytest

from service.api.diagram import DRAWING_SUFFIX, drawing_record
from service.api.storage import get_store, tenant
from service.kinds import KINDS, Limits
from tests.conftest import scenario

RECORDS = {
    "depots-maxflow": (
        b'{"kind":"maxflow","body":{"nodes":["dc-brackenford","xdock-larchgate","xdock-pellow","hub-ostwick",'
        b'"hub-saltern","store-quillmouth"],"arcs":{"from":["dc-brackenford","dc-brackenford","xdock-larchgate",'
        b'"xdock-larchgate","xdock-pellow","xdock-pellow","hub-ostwick","hub-saltern","hub-saltern"],'
        b'"to":["xdock-larchgate","xdock-pellow","xdock-pellow","hub-ostwick","hub-ostwick","hub-saltern",'
        b'"store-quillmouth","store-quillmouth","hub-ostwick"],"capacity":[120,90,30,70,40,80,100,60,25],'
        b'"key":["lane-01","lane-02","lane-03","lane-04","lane-05","lane-06","lane-07","lane-08","lane-09"]},'
        b'"source":"dc-brackenford","sink":"store-quillmouth"}}'),
    "depots-mincostflow": (
        b'{"kind":"mincostflow","body":{"nodes":{"id":["depot-corrow","depot-haverleigh","xdock-pellow",'
        b'"xdock-larchgate","store-quillmouth","store-tansy","store-wrenfield"],"supply":[140,90,0,0,-80,-65,-85]},'
        b'"arcs":{"from":["depot-corrow","depot-corrow","depot-haverleigh","depot-haverleigh","xdock-pellow",'
        b'"xdock-pellow","xdock-larchgate","xdock-larchgate","xdock-pellow"],"to":["xdock-pellow",'
        b'"xdock-larchgate","xdock-larchgate","store-wrenfield","store-quillmouth","store-tansy","store-tansy",'
        b'"store-wrenfield","xdock-larchgate"],"capacity":[120,60,100,30,90,50,40,null,25],'
        b'"cost":[4,6,3,9,2,5,2,4,1],"lower":[0,0,0,10,0,0,0,0,0],"key":["lane-c1","lane-c2","lane-h1",'
        b'"van-h-direct","lane-p1","lane-p2","lane-l1","lane-l2","shuttle-pl"]}}}'),
    "xdock-night-flowovertime": (
        b'{"kind":"flowovertime","timed":{"ids":["depot-brackwater","xdock-kelling","xdock-ormsby",'
        b'"store-fallowmere"],"tail":[0,0,1,2,1],"head":[1,2,3,3,2],"transit":[2,3,2,1,1],'
        b'"capacity":[[30.0,30.0,30.0,30.0,30.0,30.0,30.0,30.0,30.0,30.0,30.0,30.0],'
        b'[25.0,25.0,25.0,25.0,25.0,25.0,25.0,25.0,25.0,25.0,25.0,25.0],'
        b'[20.0,20.0,20.0,20.0,20.0,20.0,20.0,20.0,20.0,20.0,20.0,20.0],'
        b'[35.0,35.0,35.0,35.0,35.0,0.0,0.0,0.0,0.0,35.0,35.0,35.0],'
        b'[10.0,10.0,10.0,10.0,10.0,10.0,10.0,10.0,10.0,10.0,10.0,10.0]],'
        b'"keys":["trunk-kelling","trunk-ormsby","van-kelling","van-ormsby-night-closure",'
        b'"shuttle-kelling-ormsby"],"source":0,"sink":3}}'),
}


@pytest.mark.parametrize("name", sorted(RECORDS))
def test_a_record_written_before_the_upgrade_still_draws_identically(app, client, name):
    kind = name.rsplit("-", 1)[1]
    body = scenario(name)
    fresh = client.post("/v1/diagram.svg", json={"kind": kind, "problem": body})
    digest = client.post(f"/v1/{kind}", json=body).get_json()["digest"]
    with app.test_request_context():
        # today's record of the same problem is the same bytes: the format did not change
        assert drawing_record(kind, KINDS[kind].parse(body, Limits())) == RECORDS[name]
        # and the old bytes, kept in the store in place of today's, draw the same picture
        assert get_store().put_result(tenant(), digest + DRAWING_SUFFIX, RECORDS[name], None)
    cached = client.get(f"/v1/solutions/{digest}/diagram.svg")
    assert fresh.status_code == cached.status_code == 200
    assert cached.data == fresh.data and f'data-kind="{kind}"'.encode() in cached.data


def test_a_kept_too_large_record_still_answers_413(app, client):
    body = scenario("depots-maxflow")
    digest = client.post("/v1/maxflow", json=body).get_json()["digest"]
    with app.test_request_context():
        get_store().put_result(tenant(), digest + DRAWING_SUFFIX,
                               b'{"kind":"maxflow","too_large":{"nodes":900,"arcs":4000}}', None)
    r = client.get(f"/v1/solutions/{digest}/diagram.svg")
    assert r.status_code == 413 and "900 nodes and 4000 arcs" in r.get_json()["detail"]
