"""The vectorised object-form decoder against the ordinary one (orjson + per-field reads).

The fast path must either give exactly what the ordinary path gives (the same nodes,
arrays, defaults, digests and error pointers) or step aside and return None. Bodies
are generated with several serialisers' layouts (compact, Python's default
separators, indented, tabs and CRLF), shuffled keys, optional and null fields, and
ids holding the very bytes the decoder splits on.
"""

from __future__ import annotations

import json
import random

import numpy as np
import orjson
import pytest

from service.api import fastobjects
from service.api.fastjson import decode_columnar
from service.api.fastobjects import MIN_BYTES, decode_objects, looks_like_objects, string_columns
from service.errors import InputError
from service.model.arcs import ObjectArcs, read_network
from service.model.ids import Utf8Ids, _group_rows

LIMITS = {"max_arcs": 10**7, "max_nodes": 10**7}


def normalised(body: dict):
    net, _ = read_network(body["arcs"], body.get("nodes"), **LIMITS)
    arrays = {name: None if (a := getattr(net, name)) is None else (a.dtype.str, a.tolist())
              for name in ("tail", "head", "capacity", "unlimited", "cost", "lower")}
    return net.nodes.ids, net.nodes.kind, arrays


def assert_same_as_ordinary(raw: bytes) -> dict:
    fast = decode_objects(raw, min_bytes=0)
    assert fast is not None, "the fast path refused a body it should take"
    assert isinstance(fast["arcs"], ObjectArcs)
    slow = orjson.loads(raw)
    assert {k: v for k, v in fast.items() if k != "arcs"} == {k: v for k, v in slow.items() if k != "arcs"}
    assert normalised(fast) == normalised(slow)
    return fast


NAME_STYLES = {
    "plain": lambda i: f"depot-{i}",
    "structural bytes": lambda i: f"yard {{{i}}}, bay [{i % 7}]: north",
    "commas, colons, braces": lambda i: f"yard {{{i}}}, bay {i % 7}: north",
    "unicode": lambda i: f"Zürich-Süd-{i}-東",
    "digits as strings": lambda i: str(i),
}

DUMPERS = {
    "orjson compact": orjson.dumps,
    "python default": lambda b: json.dumps(b, ensure_ascii=False).encode(),
    "indented": lambda b: json.dumps(b, indent=2, ensure_ascii=False).encode(),
    "tabs and CRLF": lambda b: json.dumps(b, indent="\t", ensure_ascii=False).replace("\n", "\r\n").encode(),
}


def random_body(seed: int, names, *, nulls=True, missing=True, cost=True, lower=True, declared=True,
                shuffle=True):
    rng = random.Random(seed)
    n, m = rng.randint(2, 40), rng.randint(1, 300)
    ids = [names(i) for i in range(n)] if names else [rng.choice([i, i + 10**17]) for i in range(n)]
    arcs = []
    for _ in range(m):
        arc = {"from": rng.choice(ids), "to": rng.choice(ids)}
        cap = rng.randint(0, 10**rng.randint(1, 18) - 1)
        if missing and rng.random() < 0.1:
            pass
        elif nulls and rng.random() < 0.1:
            arc["capacity"] = None
        else:
            arc["capacity"] = cap
        if cost and (not shuffle or rng.random() < 0.7):
            arc["cost"] = rng.randint(-10**6, 10**6)
        if lower and (not shuffle or rng.random() < 0.3):
            arc["lower"] = 0 if arc.get("capacity") is None else rng.randint(0, arc["capacity"])
        items = list(arc.items())
        if shuffle:
            rng.shuffle(items)
        arcs.append(dict(items))
    body = {"source": ids[0], "sink": ids[-1], "arcs": arcs, "options": {"cache": "bypass"}}
    if declared and rng.random() < 0.5:
        body["nodes"] = rng.sample(ids, k=rng.randint(1, n))
    return body


@pytest.mark.parametrize("dump", DUMPERS.values(), ids=DUMPERS.keys())
@pytest.mark.parametrize("names", [None, *NAME_STYLES.values()], ids=["integer ids", *NAME_STYLES])
def test_generated_bodies_decode_as_the_ordinary_path_does(dump, names):
    for seed in range(12):
        assert_same_as_ordinary(dump(random_body(seed, names)))


def columns_both_ways(raw: bytes):
    """The arcs' columns from the uniform-layout reader and from the general one."""
    buf = np.frombuffer(raw + bytes(fastobjects.PAD), dtype=np.uint8)
    words = np.ndarray((buf.size - 7,), dtype="<u8", buffer=buf, strides=(1,))
    pos, code = fastobjects._arcs_events(raw, *fastobjects._events(raw, buf))
    count = len(orjson.loads(raw)["arcs"])
    return (fastobjects._uniform_columns(buf, words, pos, code, count),
            fastobjects._mixed_columns(buf, words, pos, code, count))


def as_lists(columns: dict) -> dict:
    out = {}
    for name, col in columns.items():
        if hasattr(col, "words"):
            out[name] = list(col)
        elif hasattr(col, "null"):
            out[name] = (col.values.tolist(), col.null.tolist())
        else:
            out[name] = col.tolist()
    return out


@pytest.mark.parametrize("dump", DUMPERS.values(), ids=DUMPERS.keys())
@pytest.mark.parametrize("names", [None, *NAME_STYLES.values()], ids=["integer ids", *NAME_STYLES])
def test_arcs_written_alike_take_the_grid_reader_and_agree_with_the_general_one(dump, names):
    for seed in range(6):
        raw = dump(random_body(seed, names, missing=False, shuffle=False))
        uniform, mixed = columns_both_ways(raw)
        assert uniform is not None
        assert as_lists(uniform) == as_lists(mixed)
        assert_same_as_ordinary(raw)


def test_a_layout_that_repeats_with_keys_in_another_order_is_read_by_the_general_reader():
    arcs = [{"from": 1, "to": 2, "capacity": 3}, {"to": 4, "from": 5, "capacity": 6}] * 3
    raw = orjson.dumps({"source": 1, "sink": 4, "arcs": arcs})
    uniform, mixed = columns_both_ways(raw)
    assert uniform is None and mixed is not None
    fast = assert_same_as_ordinary(raw)
    assert fast["arcs"].columns["from"].tolist() == [1, 5] * 3


def test_every_optional_field_absent_or_present_everywhere():
    for names in (None, NAME_STYLES["plain"]):
        for kw in ({"nulls": False, "missing": False, "cost": False, "lower": False},
                   {"nulls": False, "missing": True, "cost": True, "lower": False},
                   {"nulls": True, "missing": False, "cost": False, "lower": True}):
            for seed in range(5):
                assert_same_as_ordinary(orjson.dumps(random_body(seed, names, **kw)))


def test_capacity_absent_from_every_arc_is_no_limit_as_on_the_ordinary_path():
    raw = orjson.dumps({"source": 1, "sink": 2, "arcs": [{"from": 1, "to": 2}, {"to": 3, "from": 2}]})
    fast = assert_same_as_ordinary(raw)
    assert "capacity" not in fast["arcs"].columns


def test_numbers_of_every_length_and_sign():
    values = [0, 7, 10, 99, 12345678, 123456789, 10**17, 10**18 - 1]
    arcs = [{"from": i, "to": i + 1, "capacity": v, "cost": -v} for i, v in enumerate(values)]
    for dump in DUMPERS.values():
        fast = assert_same_as_ordinary(dump({"source": 0, "sink": 1, "arcs": arcs}))
        assert fast["arcs"].columns["capacity"].tolist() == values
        assert fast["arcs"].columns["cost"].tolist() == [-v for v in values]


REFUSED = {
    "float capacity": {"from": 1, "to": 2, "capacity": 2.5},
    "integral float": {"from": 1, "to": 2, "capacity": 2.0},
    "exponent": {"from": 1, "to": 2, "capacity": 1e3},
    "boolean": {"from": 1, "to": 2, "capacity": True},
    "string capacity": {"from": 1, "to": 2, "capacity": "9"},
    "nineteen digits": {"from": 1, "to": 2, "capacity": 10**18},
    "null cost": {"from": 1, "to": 2, "cost": None},
    "null id": {"from": None, "to": 2},
    "missing to": {"from": 1},
    "unknown field": {"from": 1, "to": 2, "colour": 3},
    "arc key": {"from": 1, "to": 2, "key": "lane-9"},
    "long key": {"from": 1, "to": 2, "capacityx": 3},
    "nested value": {"from": 1, "to": 2, "capacity": {"max": 3}},
    "list value": {"from": 1, "to": 2, "capacity": [3]},
    "mixed id kinds": {"from": 1, "to": "b"},
    "empty string id": {"from": "", "to": "b"},
    "id of 65 bytes": {"from": "x" * 65, "to": "b"},
}


@pytest.mark.parametrize("odd_arc", REFUSED.values(), ids=REFUSED.keys())
def test_bodies_outside_the_subset_are_left_to_the_ordinary_path(odd_arc):
    same_kind = "b" if isinstance(odd_arc.get("from"), str) or isinstance(odd_arc.get("to"), str) else 2
    arcs = [{"from": same_kind, "to": same_kind, "capacity": 1}] * 5 + [odd_arc]
    assert decode_objects(orjson.dumps({"source": 1, "sink": 2, "arcs": arcs}), min_bytes=0) is None


@pytest.mark.parametrize("raw", [
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"from":3}]}',  # duplicate key in an arc
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}],"arcs":[]}',  # duplicate top-level key
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}, 5]}',  # an element that is no object
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}, "x", {"from":1,"to":2}]}',
    b'{"source":1,"sink":2,"arcs":[[1,2]]}',
    b'{"source":1,"sink":2,"arcs":[{"from":"a\\u0062","to":"b"}]}',  # an escape anywhere
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}]',  # not JSON
    b'{"source":1,"sink":2,"arcs":[{"from":01,"to":2}]}',  # not JSON either
    b'{"source":1,"sink":2,"arcs":{"from":[1],"to":[2]}}',  # columnar: another path
    b'[{"from":1,"to":2}]',
    b'{"nested":{"arcs":[{"from":1,"to":2}]},"arcs":[{"from":1,"to":2,"cost":0.5}]}',
], ids=["duplicate arc key", "duplicate member", "number element", "string element", "array element",
        "escape", "truncated", "leading zero", "columnar", "not an object", "nested arcs member"])
def test_malformed_or_unusual_shapes_are_refused(raw):
    assert decode_objects(raw, min_bytes=0) is None


def test_the_top_level_arcs_member_is_found_past_nested_ones_and_arcs_named_strings():
    body = {"options": {"arcs": [1, 2], "cache": "bypass"}, "nodes": ["arcs", "b"], "source": "arcs", "sink": "b",
            "arcs": [{"from": "arcs", "to": "b", "capacity": 4}]}
    assert_same_as_ordinary(orjson.dumps(body))


BAD_BUT_DECODABLE = [
    ({"from": 1, "to": 2, "capacity": -4}, "/arcs/3/capacity"),
    ({"from": 1, "to": 2, "capacity": 3, "lower": 5}, "/arcs/3/lower"),
    ({"from": -1, "to": 2}, "/arcs/3/from"),
    ({"from": "a", "to": 2}, None),  # refused: mixed kinds (the ordinary path names it)
]


@pytest.mark.parametrize("bad, pointer", BAD_BUT_DECODABLE)
def test_errors_name_the_same_arc_and_field_on_both_paths(bad, pointer):
    arcs = [{"from": 1, "to": 2, "capacity": 1}] * 3 + [bad] + [{"from": 2, "to": 3, "capacity": 1}]
    raw = orjson.dumps({"source": 1, "sink": 3, "arcs": arcs})
    fast = decode_objects(raw, min_bytes=0)
    assert (fast is None) == (pointer is None)
    if fast is None:
        return
    with pytest.raises(InputError) as slow_error:
        normalised(orjson.loads(raw))
    with pytest.raises(InputError) as fast_error:
        normalised(fast)
    assert [(e.pointer, e.detail) for e in fast_error.value.errors] == \
        [(e.pointer, e.detail) for e in slow_error.value.errors]
    assert fast_error.value.errors[0].pointer == pointer


def test_declared_nodes_of_the_other_kind_are_reported_as_on_the_ordinary_path():
    raw = orjson.dumps({"source": "a", "sink": "b", "nodes": [1, 2],
                        "arcs": [{"from": "a", "to": "b"}, {"from": "b", "to": "c"}]})
    fast = decode_objects(raw, min_bytes=0)
    with pytest.raises(InputError) as fast_error:
        normalised(fast)
    with pytest.raises(InputError) as slow_error:
        normalised(orjson.loads(raw))
    assert [e.pointer for e in fast_error.value.errors] == [e.pointer for e in slow_error.value.errors]


def test_group_rows_is_exact_even_when_every_hash_collides():
    rng = np.random.default_rng(3)
    rows = rng.integers(0, 6, (3000, 2)).astype(np.uint64)
    seen: dict = {}
    reference = [seen.setdefault(tuple(r), len(seen)) for r in rows.tolist()]
    firsts = [reference.index(g) for g in range(len(seen))]
    # A zero multiplier sends every row to one slot: each round passes the rows on
    # and the last one groups them by sorting.
    for mix in (np.uint64(0x9E3779B97F4A7C15), np.uint64(0)):
        first, group = _group_rows(rows, mix)
        assert group.tolist() == reference and first.tolist() == firsts


def test_the_pre_check_looks_at_the_first_arc_only():
    big = orjson.dumps({"source": 0, "sink": 1, "arcs": [{"from": i, "to": i + 1, "capacity": 3}
                                                        for i in range(8000)]})
    assert len(big) >= MIN_BYTES and looks_like_objects(big)
    assert not looks_like_objects(big.replace(b'"capacity":3}', b'"capacity":3.5}', 1))
    assert not looks_like_objects(orjson.dumps({"arcs": {"from": [1] * 20000, "to": [2] * 20000}}))


def test_large_bodies_take_the_fast_path_over_http_with_the_same_answer(client):
    body = random_body(7, NAME_STYLES["plain"], nulls=False, missing=False, cost=False, lower=False)
    arcs = body["arcs"] * 40  # about 10k arcs: above MIN_BYTES in every layout
    body = {"source": body["source"], "sink": body["sink"], "arcs": arcs, "options": {"cache": "bypass"}}
    answers = []
    for dump in DUMPERS.values():
        raw = dump(body)
        assert decode_objects(raw) is not None
        r = client.post("/v1/maxflow", data=raw, headers={"Content-Type": "application/json"})
        assert r.status_code == 200, r.get_json()
        answers.append(r.get_json())
    small = {**body, "arcs": arcs[:50]}
    assert decode_objects(orjson.dumps(small)) is None  # below MIN_BYTES: orjson decodes it
    # The same problem in columnar form, which never touches this decoder.
    columns = {"from": [a["from"] for a in arcs], "to": [a["to"] for a in arcs],
               "capacity": [a["capacity"] for a in arcs]}
    r = client.post("/v1/maxflow", json={**body, "arcs": columns})
    answers.append(r.get_json())
    assert len({a["digest"] for a in answers}) == 1
    assert len({(a["value"], tuple(a["flows"]) if "flows" in a else None) for a in answers}) == 1


def test_a_bad_arc_in_a_large_body_is_named_by_pointer_over_http(client):
    arcs = [{"from": f"d{i}", "to": f"d{i + 1}", "capacity": 5} for i in range(5000)]
    arcs[4321]["capacity"] = -1
    raw = orjson.dumps({"source": "d0", "sink": "d5000", "arcs": arcs})
    assert decode_objects(raw) is not None
    r = client.post("/v1/maxflow", data=raw, headers={"Content-Type": "application/json"})
    assert r.status_code == 422 and r.mimetype == "application/problem+json"
    assert [e["pointer"] for e in r.get_json()["errors"]] == ["/arcs/4321/capacity"]


def test_a_stored_network_from_a_large_object_body_equals_its_columnar_twin(client):
    arcs = [{"from": i % 997, "to": (i * 7 + 1) % 997, "capacity": i % 50, "cost": i % 13} for i in range(6000)]
    raw = orjson.dumps({"arcs": arcs})
    assert decode_objects(raw) is not None
    one = client.put("/v1/networks/fast-objects", data=raw, headers={"Content-Type": "application/json"})
    columns = {k: [a[k] for a in arcs] for k in ("from", "to", "capacity", "cost")}
    two = client.put("/v1/networks/fast-columns", json={"arcs": columns})
    assert one.status_code == two.status_code == 201
    assert one.get_json()["digest"] == two.get_json()["digest"]


# --- string ids in columnar bodies -------------------------------------------------

def columnar(body: dict) -> dict:
    arcs = body["arcs"]
    columns = {"from": [a["from"] for a in arcs], "to": [a["to"] for a in arcs],
               "capacity": [a.get("capacity") for a in arcs]}
    return {**body, "arcs": columns}


def assert_columnar_same_as_ordinary(raw: bytes, *, read: tuple[str, ...] = ("from", "to")) -> dict:
    fast = decode_columnar(raw, string_columns(raw))
    assert fast is not None
    for name in ("from", "to"):
        assert isinstance(fast["arcs"][name], Utf8Ids) == (name in read), name
    assert normalised(fast) == normalised(orjson.loads(raw))
    return fast


@pytest.mark.parametrize("dump", DUMPERS.values(), ids=DUMPERS.keys())
@pytest.mark.parametrize("names", NAME_STYLES.values(), ids=NAME_STYLES.keys())
def test_columnar_string_ids_are_read_from_the_bytes_as_the_ordinary_path_reads_them(dump, names):
    for seed in range(4):
        body = random_body(seed, names, cost=False, lower=False)
        body = {**body, "arcs": body["arcs"] * (6000 // len(body["arcs"]) + 1)}  # above MIN_BYTES
        raw = dump(columnar(body))
        if b"[" in names(0).encode():
            # A "[" inside a string defeats the columnar decoder's bracket count: the
            # whole body goes to orjson, as before this reader existed.
            assert decode_columnar(raw, string_columns(raw)) is None
            continue
        assert_columnar_same_as_ordinary(raw)


def test_columnar_string_columns_the_bytes_cannot_give_stay_lists_and_still_agree():
    arcs = [{"from": f"d{i}", "to": f"d{i + 1}", "capacity": 3} for i in range(6000)]
    long = dict(arcs[7], to="x" * 65)  # a 65-byte id: that column stays simdjson's list
    body = columnar({"source": "d0", "sink": "d6000", "arcs": [*arcs[:7], long, *arcs[8:]]})
    assert_columnar_same_as_ordinary(orjson.dumps(body), read=("from",))
    labelled = {**body, "arcs": {**body["arcs"], "key": [f"lane-{i}" for i in range(6000)]}}
    fast = assert_columnar_same_as_ordinary(orjson.dumps(labelled), read=("from",))
    assert isinstance(fast["arcs"]["key"], list)  # arc keys are never read this way
    nested = {"options": {"arcs": {"from": ["a"], "to": ["b"]}}, **columnar(
        {"source": "d0", "sink": "d6000", "arcs": arcs})}
    assert_columnar_same_as_ordinary(orjson.dumps(nested))


def test_columnar_string_ids_take_the_fast_path_over_http_with_the_object_form_digest(client):
    arcs = [{"from": f"bay-{i % 900}", "to": f"bay-{(i * 13 + 5) % 900}", "capacity": i % 40} for i in range(8000)]
    body = {"source": "bay-0", "sink": "bay-899", "arcs": arcs, "options": {"cache": "bypass"}}
    raw = orjson.dumps(columnar(body))
    assert isinstance(decode_columnar(raw, string_columns(raw))["arcs"]["from"], Utf8Ids)
    one = client.post("/v1/maxflow", data=raw, headers={"Content-Type": "application/json"}).get_json()
    two = client.post("/v1/maxflow", json=body).get_json()
    assert one["digest"] == two["digest"] and one["value"] == two["value"] and one["flows"] == two["flows"]
