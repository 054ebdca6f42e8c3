"""What-if changes applied to a normalised network (service.model.changes)."""

from __future__ import annotations

import numpy as np
import pytest

from service.deadline import Deadline
from service.errors import InputError
from service.kinds import KINDS, Limits
from service.model.arcs import build_network, read_arcs
from service.model.changes import apply_changes
from service.model.nodes import read_nodes
from service.store import decode_network, encode_network
from tests.flowdata import depot_arcs, with_changes
from tests.http import pointers
from tests.references import max_flow_value


def network_of(arcs, nodes=None):
    net = build_network(read_arcs(arcs), read_nodes(nodes).ids, allow_lower=True)
    # As the store hands it out: decoded, read-only arrays.
    return decode_network(encode_network(net))


ARCS = [
    {"from": "dock-a", "to": "dock-b", "capacity": 10, "key": "lane-1"},
    {"from": "dock-b", "to": "dock-c", "capacity": None, "key": "lane-2"},
    {"from": "dock-a", "to": "dock-c", "capacity": 4, "lower": 2, "key": "lane-3"},
    {"from": "dock-c", "to": "dock-d", "capacity": 7, "key": None},
]


def test_changes_make_new_arrays_and_leave_the_stored_ones_alone():
    net = network_of(ARCS)
    before = {n: getattr(net, n).copy() for n in ("capacity", "unlimited", "lower")}
    out = apply_changes(net, [{"arc": 0, "capacity": 3}, {"key": "lane-2", "capacity": 5},
                              {"key": "lane-3", "closed": True}])
    assert out.capacity.tolist() == [3, 5, 0, 7]
    assert out.unlimited is None  # the only unlimited arc got a limit
    assert out.lower is None  # closing lane-3 dropped its lower bound, the only one
    for name, arr in before.items():
        assert np.array_equal(getattr(net, name), arr)
        assert not getattr(net, name).flags.writeable
    assert out.tail is net.tail and out.head is net.head  # unchanged columns are shared


def test_null_capacity_lifts_the_limit_and_fractions_keep_float():
    net = network_of(ARCS)
    out = apply_changes(net, [{"arc": 3, "capacity": None}, {"arc": 0, "capacity": 2.5}])
    assert out.unlimited.tolist() == [False, True, False, True]
    assert out.capacity.dtype.kind == "f" and out.capacity[0] == 2.5
    whole = apply_changes(net, [{"arc": 0, "capacity": 6.0}])
    assert whole.capacity.dtype == np.int64  # as the request parser normalises 6.0


def test_cost_change_on_a_network_without_costs():
    net = network_of(ARCS)
    assert net.cost is None
    out = apply_changes(net, [{"key": "lane-1", "cost": -3}])
    assert out.cost.tolist() == [-3, 0, 0, 0]


def test_no_changes_is_the_same_network():
    net = network_of(ARCS)
    assert apply_changes(net, None) is net
    assert apply_changes(net, []) is net


@pytest.mark.parametrize("changes, pointer", [
    ({"arc": 1}, "/changes"),
    ([{"arc": 0, "capacity": 1}, 7], "/changes/1"),
    ([{"arc": 0, "speed": 3}], "/changes/0/speed"),
    ([{"arc": 0, "key": "lane-1", "capacity": 1}], "/changes/0/key"),
    ([{"capacity": 1}], "/changes/0"),
    ([{"arc": 0, "capacity": 1}, {"arc": 1, "capacity": 1}, {"arc": 2, "capacity": 5}, {"arc": 4, "capacity": 1}],
     "/changes/3/arc"),
    ([{"arc": -1, "capacity": 1}], "/changes/0/arc"),
    ([{"arc": True, "capacity": 1}], "/changes/0/arc"),
    ([{"arc": 1.0, "capacity": 1}], "/changes/0/arc"),
    ([{"key": "lane-9", "capacity": 1}], "/changes/0/key"),
    ([{"key": 3, "capacity": 1}], "/changes/0/key"),
    ([{"arc": 0, "capacity": 1}, {"key": "lane-1", "cost": 2}], "/changes/1/key"),
    ([{"arc": 1, "capacity": 1}, {"arc": 0, "capacity": -1}], "/changes/1/capacity"),
    ([{"arc": 0, "capacity": "5"}], "/changes/0/capacity"),
    ([{"arc": 0, "capacity": True}], "/changes/0/capacity"),
    ([{"arc": 0, "cost": None}], "/changes/0/cost"),
    ([{"arc": 0, "closed": "yes"}], "/changes/0/closed"),
    ([{"arc": 0, "closed": True, "capacity": 3}], "/changes/0/closed"),
    ([{"arc": 0}], "/changes/0"),
    ([{"key": "lane-3", "capacity": 1}], "/changes/0/capacity"),  # below its lower bound 2
])
def test_bad_changes_name_the_entry(changes, pointer):
    net = network_of(ARCS)
    before = net.capacity.copy()
    with pytest.raises(InputError) as exc:
        apply_changes(net, changes)
    assert pointers(exc)[0] == pointer
    assert np.array_equal(net.capacity, before)


def test_keys_needed_for_key_changes():
    net = network_of([{"from": 0, "to": 1, "capacity": 3}])
    with pytest.raises(InputError) as exc:
        apply_changes(net, [{"key": "lane-1", "capacity": 1}])
    assert pointers(exc) == ["/changes/0/key"]


def test_key_index_is_only_built_when_keys_are_used():
    net = network_of(ARCS)
    calls = []

    def index():
        calls.append(1)
        return {"lane-1": 0, "lane-2": 1, "lane-3": 2}

    apply_changes(net, [{"arc": 0, "capacity": 1}], key_index=index)
    assert calls == []
    apply_changes(net, [{"key": "lane-2", "capacity": 1}], key_index=index)
    assert calls == [1]


@pytest.mark.parametrize("seed", [3, 8, 21])
def test_what_if_max_flow_matches_networkx_on_the_changed_arcs(seed):
    """Reference: networkx.maximum_flow_value on the arcs rebuilt with the changes."""
    arcs = depot_arcs(seed, nodes=10, arcs=35)
    source = arcs[0]["from"]
    sink = next(a["to"] for a in reversed(arcs) if a["to"] != source)
    rng = np.random.default_rng(seed)
    picked = rng.choice(len(arcs), size=8, replace=False)
    changes = []
    for j, i in enumerate(picked.tolist()):
        if j % 3 == 0:
            changes.append({"arc": i, "closed": True})
        elif j % 3 == 1:
            changes.append({"key": arcs[i]["key"], "capacity": int(rng.integers(0, 60))})
        else:
            changes.append({"arc": i, "capacity": None if j == 2 else 100})
    expected_arcs = with_changes(arcs, changes)
    kind = KINDS["maxflow"]
    net = apply_changes(network_of(arcs), changes, key_index={a["key"]: i for i, a in enumerate(arcs)})
    problem = kind.from_network(net, {"source": source, "sink": sink}, Limits())
    result = kind.solve(problem, Deadline.after(60))
    try:
        expected = max_flow_value(expected_arcs, source, sink)
    except Exception as exc:  # networkx raises NetworkXUnbounded for an unlimited s-t path
        assert type(exc).__name__ == "NetworkXUnbounded"
        assert result["status"] == "unbounded"
        return
    assert result["status"] == "optimal" and result["value"] == expected
    # And the same digest as posting the changed network in full (identical question).
    direct = kind.parse({"source": source, "sink": sink, "arcs": expected_arcs}, Limits())
    assert direct.digest == problem.digest
