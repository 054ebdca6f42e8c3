"""The compiled body scanner against the ordinary decode (orjson + per-field reads).

The scanner must either give exactly what the ordinary path gives (the same members,
nodes, arrays, defaults, digests and error pointers) or step aside and return None.
Bodies are generated in both arc forms with several serialisers' layouts (compact,
Python's default separators, indented, tabs and CRLF), shuffled keys, optional and
null fields, and ids holding the very bytes a scanner splits on; mutated bodies check
that it never accepts what orjson refuses.
"""

from __future__ import annotations

import json
import random

import orjson
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.model import fastarcs
from service.model.fastarcs import MIN_BYTES, decode_arcs_body
from service.model.fastjson import decode_columnar
from service.errors import InputError
from service.model.arccolumns import ArcColumns, read_arcs
from service.model.arcs import read_network
from tests.http import pointers

LIMITS = {"max_arcs": 10**7, "max_nodes": 10**7}


def test_the_compiled_scanner_is_installed():
    # `pip install` builds it; without it every body silently takes the slow path.
    assert fastarcs.available()


def normalised(body: dict):
    net, _ = read_network(body["arcs"], body.get("nodes"), **LIMITS)
    arrays = {name: None if (a := getattr(net, name)) is None else (a.dtype.str, a.tolist())
              for name in ("tail", "head", "capacity", "unlimited", "cost", "lower")}
    return net.nodes.ids, net.nodes.kind, arrays


def outcome(body: dict):
    """What the model makes of a decoded body: its normalised network, or its errors."""
    try:
        return normalised(body)
    except InputError as exc:
        return [(e.pointer, e.detail) for e in exc.errors]


def assert_same_as_ordinary(raw: bytes) -> dict:
    fast = decode_arcs_body(raw, min_bytes=0)
    assert fast is not None, "the scanner refused a body it should take"
    slow = orjson.loads(raw)
    assert {k: v for k, v in fast.items() if k != "arcs"} == {k: v for k, v in slow.items() if k != "arcs"}
    assert outcome(fast) == outcome(slow)
    return fast


NAME_STYLES = {
    "plain": lambda i: f"depot-{i}",
    "structural bytes": lambda i: f"yard {{{i}}}, bay [{i % 7}]: north",
    "unicode": lambda i: f"Zürich-Süd-{i}-東",
    "digits as strings": lambda i: str(i),
    "long": lambda i: f"regional-distribution-centre-{i:05d}-loading-bay-{'x' * (i % 90)}",
}

DUMPERS = {
    "orjson compact": orjson.dumps,
    "python default": lambda b: json.dumps(b, ensure_ascii=False).encode(),
    "indented": lambda b: json.dumps(b, indent=2, ensure_ascii=False).encode(),
    "tabs and CRLF": lambda b: json.dumps(b, indent="\t", ensure_ascii=False).replace("\n", "\r\n").encode(),
}


def a_fraction(rng: random.Random) -> float:
    """Numbers serialisers write with a fraction or an exponent."""
    return rng.choice([rng.randint(0, 1000) + 0.5, rng.random(), rng.random() * 10.0 ** rng.randint(-30, 30),
                       float(rng.randint(0, 10**6)), 2.0**60 + 2**9, 1e-320])


def random_body(seed: int, names, *, nulls=True, missing=True, cost=True, lower=True, declared=True,
                shuffle=True, fractions=None, keys=None):
    rng = random.Random(seed)
    fractions = rng.random() < 0.4 if fractions is None else fractions
    keys = rng.random() < 0.4 if keys is None else keys
    n, m = rng.randint(2, 40), rng.randint(1, 300)
    ids = [names(i) for i in range(n)] if names else [rng.choice([i, i + 10**17]) for i in range(n)]
    arcs = []
    for _ in range(m):
        arc = {"from": rng.choice(ids), "to": rng.choice(ids)}
        cap = rng.randint(0, 10**rng.randint(1, 18) - 1)
        if fractions and rng.random() < 0.3:
            cap = a_fraction(rng)
        if missing and rng.random() < 0.1:
            pass
        elif nulls and rng.random() < 0.1:
            arc["capacity"] = None
        else:
            arc["capacity"] = cap
        if cost and (not shuffle or rng.random() < 0.7):
            arc["cost"] = rng.randint(-10**6, 10**6) if not fractions or rng.random() < 0.5 else -a_fraction(rng)
        if lower and (not shuffle or rng.random() < 0.3):
            cap = arc.get("capacity")
            arc["lower"] = 0 if cap is None else rng.randint(0, min(int(cap), 10**18 - 1)) if rng.random() < 0.8 else cap / 2
        if keys and rng.random() < 0.8:
            arc["key"] = None if rng.random() < 0.2 else f"lane-{len(arcs)}-{names(len(arcs)) if names else 'x'}"
        items = list(arc.items())
        if shuffle:
            rng.shuffle(items)
        arcs.append(dict(items))
    body = {"source": ids[0], "sink": ids[-1], "arcs": arcs, "options": {"cache": "bypass"}}
    if declared and rng.random() < 0.5:
        body["nodes"] = rng.sample(ids, k=rng.randint(1, n))
    return body


def columnar(body: dict) -> dict:
    """The same arcs as columns (an absent capacity as null, an absent cost or lower as 0)."""
    arcs = body["arcs"]
    columns = {"from": [a["from"] for a in arcs], "to": [a["to"] for a in arcs]}
    for name, default in (("capacity", None), ("cost", 0), ("lower", 0), ("key", None)):
        if any(name in a for a in arcs):
            columns[name] = [a.get(name, default) for a in arcs]
    return {**body, "arcs": columns}


@pytest.mark.parametrize("dump", DUMPERS.values(), ids=DUMPERS.keys())
@pytest.mark.parametrize("names", [None, *NAME_STYLES.values()], ids=["integer ids", *NAME_STYLES])
def test_generated_bodies_decode_as_the_ordinary_path_does(dump, names):
    for seed in range(10):
        body = random_body(seed, names)
        fast = assert_same_as_ordinary(dump(body))
        assert isinstance(fast["arcs"], ArcColumns) and fast["arcs"].form == "objects"
        fast = assert_same_as_ordinary(dump(columnar(body)))
        assert isinstance(fast["arcs"], ArcColumns) and fast["arcs"].form == "columns"
        assert (fast["arcs"].ends.names is None) == (names is None)


def column_form(arcs: ArcColumns):
    """Everything an ArcColumns holds but its pointer style, as plain values."""
    def mask(m):
        return None if m is None else m.tolist()
    numbers = {name: (col.values.dtype.str, col.values.tolist(), mask(col.null), mask(col.invalid))
               for name, col in arcs.numbers.items()}
    ends = (arcs.ends.tail.dtype.str, arcs.ends.tail.tolist(), arcs.ends.head.tolist(), arcs.ends.names)
    return arcs.count, ends, numbers, arcs.keys


@pytest.mark.parametrize("names", [None, NAME_STYLES["plain"]], ids=["integer ids", "string ids"])
def test_every_decode_path_hands_the_model_the_same_columns(names):
    # One column form: the scanner, simdjson and orjson (objects or columns) all end in
    # an ArcColumns with the same typed content, so the model never asks which ran.
    for seed in range(5):
        body = random_body(seed, names, nulls=False, missing=False, fractions=False, keys=True)
        body["arcs"] = [{**a, "capacity": a.get("capacity", 1), "cost": a.get("cost", 0)} for a in body["arcs"]]
        objects, columns = orjson.dumps(body), orjson.dumps(columnar(body))
        forms = {"orjson objects": read_arcs(orjson.loads(objects)["arcs"]),
                 "orjson columns": read_arcs(orjson.loads(columns)["arcs"]),
                 "scanner objects": decode_arcs_body(objects, min_bytes=0)["arcs"],
                 "scanner columns": decode_arcs_body(columns, min_bytes=0)["arcs"]}
        simd = decode_columnar(columns)
        if names is None:
            assert simd is not None  # numeric columns (the keys hold no "[")
        if simd is not None:
            forms["simdjson columns"] = read_arcs(simd["arcs"])
        expected = column_form(forms["orjson objects"])
        for path, arcs in forms.items():
            assert isinstance(arcs, ArcColumns), path
            assert column_form(arcs) == expected, path
            assert arcs.form == path.split()[1], path


def test_every_optional_field_absent_or_present_everywhere():
    for names in (None, NAME_STYLES["plain"]):
        for kw in ({"nulls": False, "missing": False, "cost": False, "lower": False},
                   {"nulls": False, "missing": True, "cost": True, "lower": False},
                   {"nulls": True, "missing": False, "cost": False, "lower": True}):
            for seed in range(5):
                body = random_body(seed, names, **kw)
                assert_same_as_ordinary(orjson.dumps(body))
                assert_same_as_ordinary(orjson.dumps(columnar(body)))


def test_capacity_absent_from_every_arc_is_no_limit_as_on_the_ordinary_path():
    raw = orjson.dumps({"source": 1, "sink": 2, "arcs": [{"from": 1, "to": 2}, {"to": 3, "from": 2}]})
    fast = assert_same_as_ordinary(raw)
    assert "capacity" not in fast["arcs"].numbers


def test_ids_are_numbered_from_before_to_even_when_an_arc_names_to_first():
    # The contract's node order: declared nodes, then first mention, from before to.
    raw = orjson.dumps({"source": "a", "sink": "c", "arcs": [{"to": "b", "from": "a"}, {"to": "a", "from": "c"}]})
    fast = assert_same_as_ordinary(raw)
    net, _ = read_network(fast["arcs"], None, **LIMITS)
    assert net.nodes.ids == ["a", "b", "c"]
    declared = orjson.dumps({"nodes": ["c"], "arcs": {"to": ["b", "a"], "from": ["a", "c"]}})
    net, _ = read_network(assert_same_as_ordinary(declared)["arcs"], ["c"], **LIMITS)
    assert net.nodes.ids == ["c", "a", "b"]


def test_numbers_of_every_length_and_sign():
    values = [0, 7, 10, 99, 12345678, 123456789, 10**17, 10**18 - 1]
    arcs = [{"from": i, "to": i + 1, "capacity": v, "cost": -v} for i, v in enumerate(values)]
    for dump in DUMPERS.values():
        fast = assert_same_as_ordinary(dump({"source": 0, "sink": 1, "arcs": arcs}))
        assert fast["arcs"].numbers["capacity"].values.tolist() == values
        assert fast["arcs"].numbers["cost"].values.tolist() == [-v for v in values]
    fast = assert_same_as_ordinary(b'{"arcs": [{"from": -0, "to": 1, "cost": -0}]}')
    assert fast["arcs"].ends.tail.tolist() == [0]


def test_numbers_with_fractions_and_exponents_in_every_spelling():
    tokens = [b"2.5", b"0.1", b"-0.0", b"4.0", b"1E5", b"1e+2", b"2.50e-3", b"0.1e+3", b"-7.25E-1", b"1e-400",
              b"17976931348623157081452742373170435679807056752584499659891747.0",
              b"9007199254740993.0", b"3"]
    for field in (b"capacity", b"cost"):
        objects = b'{"arcs":[' + b",".join(b'{"from":%d,"to":%d,"%s":%s}' % (i, i + 1, field, t)
                                         for i, t in enumerate(tokens)) + b"]}"
        columns = b'{"arcs":{"from":[%s],"to":[%s],"%s":[%s]}}' % (
            b",".join(b"%d" % i for i in range(len(tokens))), b",".join(b"%d" % (i + 1) for i in range(len(tokens))),
            field, b",".join(tokens))
        for raw in (objects, columns):
            assert_same_as_ordinary(raw)
    # All fractions integral: the model makes the column int64 on both paths.
    fast = assert_same_as_ordinary(b'{"arcs":[{"from":1,"to":2,"capacity":4.0},{"from":2,"to":3,"capacity":null}]}')
    assert normalised(fast)[2]["capacity"][0] == "<i8"


def test_many_distinct_and_long_ids_intern_exactly():
    # 60k distinct ids grow the scanner's table many times; ids of 1-200 characters
    # compare in every length class.
    ids = [f"n{i}" + "y" * (i % 200) for i in range(60_000)]
    arcs = [{"from": ids[i], "to": ids[(i * 7919 + 1) % len(ids)], "capacity": i % 9} for i in range(len(ids))]
    fast = assert_same_as_ordinary(orjson.dumps({"source": ids[0], "sink": ids[1], "arcs": arcs}))
    assert len(fast["arcs"].ends.names) == len(ids)


REFUSED = {
    "fractional id": {"from": 1.5, "to": 2},
    "boolean": {"from": 1, "to": 2, "capacity": True},
    "string capacity": {"from": 1, "to": 2, "capacity": "9"},
    "nineteen digits": {"from": 1, "to": 2, "capacity": 10**18},
    "null cost": {"from": 1, "to": 2, "cost": None},
    "null id": {"from": None, "to": 2},
    "missing to": {"from": 1},
    "unknown field": {"from": 1, "to": 2, "colour": 3},
    "numeric arc key": {"from": 1, "to": 2, "key": 9},
    "escaped arc key": {"from": 1, "to": 2, "key": "lane \"9\""},
    "long key": {"from": 1, "to": 2, "capacityx": 3},
    "prefix of a key": {"from": 1, "to": 2, "capa": 3},
    "nested value": {"from": 1, "to": 2, "capacity": {"max": 3}},
    "list value": {"from": 1, "to": 2, "capacity": [3]},
    "mixed id kinds": {"from": 1, "to": "b"},
    "escaped id": {"from": "a\nb", "to": "b"},
}


@pytest.mark.parametrize("odd_arc", REFUSED.values(), ids=REFUSED.keys())
def test_bodies_outside_the_subset_are_left_to_the_ordinary_path(odd_arc):
    same_kind = "b" if isinstance(odd_arc.get("from"), str) or isinstance(odd_arc.get("to"), str) else 2
    arcs = [{"from": same_kind, "to": same_kind, "capacity": 1}] * 5 + [odd_arc]
    assert decode_arcs_body(orjson.dumps({"source": 1, "sink": 2, "arcs": arcs}), min_bytes=0) is None
    if "from" in odd_arc and "to" in odd_arc and set(odd_arc) <= {"from", "to", "capacity", "cost"}:
        assert decode_arcs_body(orjson.dumps(columnar({"arcs": arcs})), min_bytes=0) is None


@pytest.mark.parametrize("raw", [
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"from":3}]}',  # duplicate key in an arc
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}],"arcs":[]}',  # duplicate arcs member
    b'{"source":1,"sink":2,"source":3,"arcs":[{"from":1,"to":2}]}',  # duplicate other member
    b'{"source":1,"sink":2,"arcs":{"from":[1],"from":[2],"to":[2]}}',  # duplicate column
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}, 5]}',  # an element that is no object
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}, "x", {"from":1,"to":2}]}',
    b'{"source":1,"sink":2,"arcs":[[1,2]]}',
    b'{"source":1,"sink":2,"arcs":{"from":[[1]],"to":[2]}}',
    b'{"source":1,"sink":2,"arcs":{"from":1,"to":2}}',
    b'{"source":1,"sink":2,"arcs":[{"from":"a\\u0062","to":"b"}]}',  # an escape in the arcs
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}]',  # not JSON
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}]} x',  # trailing bytes
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2},]}',  # trailing comma
    b'{"source":1,"sink":2,"arcs":[{"from":01,"to":2}]}',  # a leading zero
    b'{"source":1,"sink":2,"arcs":[{"from":-,"to":2}]}',
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"capacity":1e400}]}',  # orjson: infinite
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"capacity":1.' + b'5' * 70 + b'}]}',  # a long token
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"capacity":1.}]}',
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"capacity":.5}]}',
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"capacity":1e}]}',
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2,"capacity":01.5}]}',
    b'{"source":1,"sink":2,"arcs":{"from":[1],"to":[2],"capacity":[12345678901234567890]}}',  # 20 digits
    b'{"source":NaN,"sink":2,"arcs":[{"from":1,"to":2}]}',  # orjson refuses the member
    b'{"source":1,"sink":2,"arcs":[{"from":"\xff","to":"b"}]}',  # not UTF-8
    b'{"source":1,"sink":2,"arcs":[{"from":"a\x00","to":"b"}]}',  # a raw control byte
    b'{"source":1,"sink":2,"arcs":[{"from":1,"to":2}]}\x00',
    b'[{"from":1,"to":2}]',
    b'{"source":1,"sink":2,"arcs":[]}',  # no ids: nothing to gain, the kind is unknown
    b'{"source":1,"sink":2}',
], ids=["duplicate arc key", "duplicate arcs", "duplicate member", "duplicate column", "number element",
        "string element", "array element", "nested column", "scalar column", "escape", "truncated", "trailing",
        "trailing comma", "leading zero", "lone minus", "infinite", "long fraction", "bare point",
        "no integer part", "empty exponent", "leading zero fraction", "twenty digits", "NaN member", "bad UTF-8", "control byte",
        "NUL after", "not an object", "empty arcs", "no arcs"])
def test_malformed_or_unusual_shapes_are_refused(raw):
    assert decode_arcs_body(raw, min_bytes=0) is None


def test_members_beside_the_arcs_are_decoded_by_orjson_whatever_they_hold():
    body = {"options": {"arcs": [1, 2], "cache": "bypass", "note": "a \"quoted\" \\ [x] {y}"},
            "nodes": [{"id": "arcs", "supply": 3}, {"id": "b", "supply": -3}], "source": "arcs", "sink": "b",
            "arcs": [{"from": "arcs", "to": "b", "capacity": 4}], "comment": None, "deep": [[[[{"a": [1.5]}]]]]}
    for dump in DUMPERS.values():
        assert_same_as_ordinary(dump(body))


BAD_BUT_DECODABLE = [
    ({"from": 1, "to": 2, "capacity": -4}, "/arcs/3/capacity"),
    ({"from": 1, "to": 2, "capacity": 3, "lower": 5}, "/arcs/3/lower"),
    ({"from": -1, "to": 2}, "/arcs/3/from"),
    ({"from": 1, "to": 2, "cost": 10**18 - 1, "capacity": 1}, None),  # fine: within 2**62
]


@pytest.mark.parametrize("bad, pointer", BAD_BUT_DECODABLE)
def test_errors_name_the_same_arc_and_field_on_both_paths(bad, pointer):
    arcs = [{"from": 1, "to": 2, "capacity": 1}] * 3 + [bad] + [{"from": 2, "to": 3, "capacity": 1}]
    for body in ({"source": 1, "sink": 3, "arcs": arcs}, columnar({"source": 1, "sink": 3, "arcs": arcs})):
        raw = orjson.dumps(body)
        fast = decode_arcs_body(raw, min_bytes=0)
        got = outcome(fast)
        assert got == outcome(orjson.loads(raw))
        if pointer is not None:
            name = pointer.rsplit("/", 1)[1]
            expected = pointer if isinstance(body["arcs"], list) else f"/arcs/{name}/3"
            assert got[0][0] == expected


@pytest.mark.parametrize("raw", [
    b'{"source": "a", "sink": "b", "nodes": [1, 2], "arcs": [{"from": "a", "to": "b"}, {"from": "b", "to": "c"}]}',
    b'{"source": "a", "sink": "b", "arcs": [{"from": "a", "to": ""}, {"from": "b", "to": "c"}]}',
    # The first id empty: once copied to a scanner buffer not yet allocated (UBSan found it).
    b'{"source": "a", "sink": "b", "arcs": {"from": ["", "a"], "to": ["b", ""]}}',
    b'{"source": "a", "sink": "b", "arcs": {"from": ["a"], "to": ["b"], "capacity": [1], "lower": [2]}}',
    b'{"arcs": [{"from": "a", "to": "b", "key": "lane"}, {"from": "b", "to": "c", "key": "lane"}]}',
    b'{"arcs": {"from": ["a", "b"], "to": ["b", "c"], "key": [null, ""]}}',
], ids=["declared ints", "empty id", "empty first id", "lower above capacity", "duplicate arc keys",
        "empty arc key"])
def test_errors_of_decodable_bodies_are_reported_as_on_the_ordinary_path(raw):
    fast = decode_arcs_body(raw, min_bytes=0)
    assert fast is not None
    assert outcome(fast) == outcome(orjson.loads(raw))
    assert isinstance(outcome(fast), list)


@pytest.mark.parametrize("raw", [
    b'{"source": "a", "sink": "b", "arcs": {"from": ["a", "b"], "to": ["b"]}}',
    b'{"source": 1, "sink": 2, "arcs": {"from": [1, 2], "to": [2, 3], "capacity": [1]}}',
    b'{"source": "a", "sink": "b", "arcs": {"from": ["a", "b"], "to": ["b", "c"], "key": ["x"]}}',
    b'{"source": "a", "sink": "b", "arcs": {"to": ["a", "b"]}}',
    b'{"source": 1, "sink": 2, "arcs": {"from": [1], "capacity": [3]}}',
], ids=["unequal ids", "short capacity", "short keys", "no from column", "no to column"])
def test_columns_missing_or_of_unequal_lengths_are_left_to_the_ordinary_path(raw):
    # The model's columns always have one length; the ordinary path names the fault.
    assert decode_arcs_body(raw, min_bytes=0) is None
    assert outcome(orjson.loads(raw))[0][1].startswith(("has ", "is required"))


def test_an_id_of_201_characters_gets_the_ordinary_error():
    raw = orjson.dumps({"arcs": [{"from": "a" * 201, "to": "b"}, {"from": "b", "to": "a" * 201}]})
    assert outcome(decode_arcs_body(raw, min_bytes=0)) == outcome(orjson.loads(raw))


# --- mutated bodies: never accept what orjson refuses -------------------------------

SEED_BODIES = [orjson.dumps(random_body(s, names, declared=True)) for s, names in
               enumerate([None, NAME_STYLES["plain"], NAME_STYLES["structural bytes"]])]
SEED_BODIES += [orjson.dumps(columnar(random_body(3, NAME_STYLES["unicode"])))]
NASTY = [b'"', b"\\", b"{", b"}", b"[", b"]", b",", b":", b"-", b"0", b".", b"e", b"n", b"\x00", b"\xc3", b" ",
         b"null", b"1e5", b"2.5", b"E-3", b'"x"', b'"key":', b"\xe6\x9d\xb1"]


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_mutated_bodies_are_refused_or_decoded_as_orjson_decodes_them(data):
    raw = bytearray(data.draw(st.sampled_from(SEED_BODIES)))
    for _ in range(data.draw(st.integers(1, 3))):
        at = data.draw(st.integers(0, len(raw) - 1))
        what = data.draw(st.sampled_from(["replace", "insert", "delete"]))
        piece = data.draw(st.sampled_from(NASTY))
        if what == "replace":
            raw[at:at + len(piece)] = piece
        elif what == "insert":
            raw[at:at] = piece
        else:
            del raw[at:at + data.draw(st.integers(1, 8))]
    raw = bytes(raw)
    fast = decode_arcs_body(raw, min_bytes=0)
    if fast is None:
        return
    slow = orjson.loads(raw)  # raises if the scanner took a body that is not JSON
    assert {k: v for k, v in fast.items() if k != "arcs"} == {k: v for k, v in slow.items() if k != "arcs"}
    assert outcome(fast) == outcome(slow)


def test_every_proper_prefix_of_a_body_is_refused():
    # A prefix of a JSON object is never JSON: the scanner must stop at the end of the
    # bytes wherever they end (mid-key, mid-id, mid-number, mid-null).
    bodies = [b'{"source":"a","sink":"b","arcs":[{"from":"depot-north-1","to":"b","capacity":null,"cost":-12}]}',
              b'{"arcs":{"from":[1,2],"to":[2,3],"capacity":[null,1234567]},"options":{"cache":"use"}}',
              b'{"arcs": [ {"to": "b\xc3\xa9", "lower": 0, "from": "a"} ] }']
    for body in bodies:
        assert decode_arcs_body(body, min_bytes=0) is not None
        for cut in range(len(body)):
            assert decode_arcs_body(body[:cut], min_bytes=0) is None, body[:cut]


# --- over HTTP ---------------------------------------------------------------------

def test_large_bodies_take_the_scanner_over_http_with_the_same_answer(client):
    body = random_body(7, NAME_STYLES["plain"], nulls=False, missing=False, cost=False, lower=False, fractions=False,
                       keys=False)
    arcs = body["arcs"] * 40  # about 10k arcs: above MIN_BYTES in every layout
    body = {"source": body["source"], "sink": body["sink"], "arcs": arcs, "options": {"cache": "bypass"}}
    answers = []
    for form in (body, columnar(body)):
        for dump in DUMPERS.values():
            raw = dump(form)
            assert decode_arcs_body(raw) is not None
            r = client.post("/v1/maxflow", data=raw, headers={"Content-Type": "application/json"})
            assert r.status_code == 200, r.get_json()
            answers.append(r.get_json())
    small = {**body, "arcs": arcs[:50]}
    assert len(orjson.dumps(small)) < MIN_BYTES and decode_arcs_body(orjson.dumps(small)) is None
    # Fractional capacities: the scanner reads them too. The same 50 arcs compact (under
    # MIN_BYTES: the ordinary path) and indented far past it (the scanner) are one problem.
    fractional = {**body, "arcs": [{**a, "capacity": a["capacity"] + 0.25} for a in arcs[:50]]}
    compact, padded = orjson.dumps(fractional), json.dumps(fractional, indent=" " * 100).encode()
    assert decode_arcs_body(compact) is None and decode_arcs_body(padded) is not None
    one, two = (client.post("/v1/maxflow", data=raw, headers={"Content-Type": "application/json"}).get_json()
                for raw in (compact, padded))
    assert one["status"] == two["status"] == "optimal"
    assert (one["digest"], one["value"], one["flows"]) == (two["digest"], two["value"], two["flows"])
    assert len({a["digest"] for a in answers}) == 1
    assert len({(a["value"], tuple(a["flows"])) for a in answers}) == 1


def test_a_bad_arc_in_a_large_body_is_named_by_pointer_over_http(client):
    arcs = [{"from": f"d{i}", "to": f"d{i + 1}", "capacity": 5} for i in range(5000)]
    arcs[4321]["capacity"] = -1
    for body, pointer in (({"source": "d0", "sink": "d5000", "arcs": arcs}, "/arcs/4321/capacity"),
                          (columnar({"source": "d0", "sink": "d5000", "arcs": arcs}), "/arcs/capacity/4321")):
        raw = orjson.dumps(body)
        assert decode_arcs_body(raw) is not None
        r = client.post("/v1/maxflow", data=raw, headers={"Content-Type": "application/json"})
        assert r.status_code == 422 and r.mimetype == "application/problem+json"
        assert pointers(r) == [pointer]


def test_a_stored_network_from_a_large_object_body_equals_its_columnar_twin(client):
    arcs = [{"from": f"bay-{i % 997}", "to": f"bay-{(i * 7 + 1) % 997}", "capacity": i % 50, "cost": i % 13}
            for i in range(6000)]
    raw = orjson.dumps({"arcs": arcs})
    assert decode_arcs_body(raw) is not None
    one = client.put("/v1/networks/fast-objects", data=raw, headers={"Content-Type": "application/json"})
    columns = {k: [a[k] for a in arcs] for k in ("from", "to", "capacity", "cost")}
    two = client.put("/v1/networks/fast-columns", data=orjson.dumps({"arcs": columns}),
                     headers={"Content-Type": "application/json"})
    # A small body, which the ordinary path decodes.
    three = client.put("/v1/networks/small", json={"arcs": arcs[:40]})
    four = client.put("/v1/networks/small-scanned", data=orjson.dumps({"arcs": arcs[:40]}),
                      headers={"Content-Type": "application/json"})
    assert one.status_code == two.status_code == three.status_code == four.status_code == 201
    assert one.get_json()["digest"] == two.get_json()["digest"]
    assert three.get_json()["digest"] == four.get_json()["digest"]
