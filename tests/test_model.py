"""Normalisation of arcs and node ids (no Flask, no solver)."""

import numpy as np
import pytest

from service.errors import InputError, ProblemTooLarge
from service.model.arcs import build_network, read_arcs
from service.model.columns import MAX_MAGNITUDE, number_column
from service.model.ids import IdColumn
from service.model.nodes import read_nodes
from tests.http import pointers


def network(arcs, nodes=None, **kw):
    raw = read_arcs(arcs)
    return build_network(raw, read_nodes(nodes).ids, **kw)


def test_object_and_columnar_forms_normalise_identically():
    objects = [{"from": "a", "to": "b", "capacity": 3}, {"from": "b", "to": "c", "capacity": None}]
    columns = {"from": ["a", "b"], "to": ["b", "c"], "capacity": [3, None]}
    one, two = network(objects), network(columns)
    assert one.nodes.ids == two.nodes.ids == ["a", "b", "c"]
    for field in ("tail", "head", "capacity", "unlimited"):
        assert np.array_equal(getattr(one, field), getattr(two, field))
    assert one.tail.dtype == np.int32 and one.capacity.dtype == np.int64


def test_node_order_is_declared_nodes_then_first_appearance():
    net = network({"from": [7, 3, 9], "to": [3, 1, 7]}, nodes=[9, 42])
    assert net.nodes.ids == [9, 42, 7, 3, 1]
    assert net.tail.tolist() == [2, 3, 0] and net.head.tolist() == [3, 4, 2]


def test_sparse_large_integer_ids_use_the_sorting_path():
    ids = [10**15, 5, 10**15 + 1]
    net = network({"from": ids, "to": [5, 10**15 + 1, 10**15]})
    assert net.nodes.ids == ids
    assert net.tail.tolist() == [0, 1, 2] and net.head.tolist() == [1, 2, 0]


def test_string_ids_keep_first_appearance_order():
    net = network([{"from": "z", "to": "y"}, {"from": "x", "to": "z"}])
    assert net.nodes.ids == ["z", "y", "x"]
    assert net.nodes.index_of("x") == 2 and net.nodes.index_of(3) is None


def test_absent_or_null_capacity_means_no_limit():
    net = network({"from": ["a", "a"], "to": ["b", "b"], "capacity": [None, 4]})
    assert net.unlimited.tolist() == [True, False]
    assert network([{"from": "a", "to": "b"}]).unlimited.tolist() == [True]


def test_integral_floats_are_integers_and_fractions_stay_float():
    assert network({"from": ["a"], "to": ["b"], "capacity": [4.0]}).capacity.dtype == np.int64
    assert network({"from": ["a"], "to": ["b"], "capacity": [4.5]}).capacity.dtype == np.float64


@pytest.mark.parametrize("bad, detail", [
    (True, "must be a number or null"),
    ("5", "must be a number or null"),
    (-1, "must be >= 0"),
    (2**63, f"must be at most {MAX_MAGNITUDE} in magnitude"),
    (1e30, f"must be at most {MAX_MAGNITUDE} in magnitude"),
])
def test_bad_capacities_are_named_by_pointer(bad, detail):
    with pytest.raises(InputError) as exc:
        network([{"from": "a", "to": "b", "capacity": 1}, {"from": "b", "to": "c", "capacity": bad}])
    assert exc.value.errors[0].pointer == "/arcs/1/capacity"
    assert exc.value.errors[0].detail == detail
    with pytest.raises(InputError) as exc:
        network({"from": ["a", "b"], "to": ["b", "c"], "capacity": [1, bad]})
    assert pointers(exc) == ["/arcs/capacity/1"]


def test_mixed_id_kinds_are_rejected_at_the_minority():
    with pytest.raises(InputError) as exc:
        network({"from": ["a", "b", "c"], "to": ["b", "c", 4]})
    assert pointers(exc) == ["/arcs/to/2"]


@pytest.mark.parametrize("good, bad", [
    (1, -1), ("a", ""), ("a", "x" * 201), (1, 1.5), ("a", None), ("a", [1]), (1, True),
])
def test_bad_ids(good, bad):
    with pytest.raises(InputError) as exc:
        network([{"from": good, "to": good}, {"from": bad, "to": good}])
    assert pointers(exc) == ["/arcs/1/from"]


def test_shape_errors():
    cases = [
        ({"from": ["a"], "to": ["b", "c"]}, "/arcs/to"),
        ({"from": ["a"]}, "/arcs/to"),
        ({"from": ["a"], "to": ["b"], "weight": [1]}, "/arcs/weight"),
        ([{"from": "a", "to": "b", "colour": 1}], "/arcs/0/colour"),
        ([{"from": "a", "to": "b"}, {"from": "a"}], "/arcs/1/to"),
        ([{"from": "a", "to": "b"}, 5], "/arcs/1"),
        ({"from": "a", "to": ["b"]}, "/arcs/from"),
        ("arcs", "/arcs"),
    ]
    for arcs, ptr in cases:
        with pytest.raises(InputError) as exc:
            network(arcs)
        assert pointers(exc)[0] == ptr, arcs


def test_arc_limit_is_a_413():
    with pytest.raises(ProblemTooLarge) as exc:
        read_arcs({"from": [1, 2, 3], "to": [2, 3, 4]}, max_arcs=2)
    assert exc.value.status == 413 and pointers(exc) == ["/arcs"]


def test_duplicate_declared_nodes_and_keys():
    with pytest.raises(InputError) as exc:
        network({"from": ["a"], "to": ["b"]}, nodes=["a", "c", "a"])
    assert pointers(exc) == ["/nodes/2"]
    with pytest.raises(InputError) as exc:
        network({"from": [1], "to": [2]}, nodes=[5, 5])
    assert pointers(exc) == ["/nodes/1"]
    with pytest.raises(InputError) as exc:
        network([{"from": "a", "to": "b", "key": "k"}, {"from": "b", "to": "a", "key": "k"}])
    assert pointers(exc) == ["/arcs/1/key"]


def test_lower_bounds_checked_against_capacity():
    with pytest.raises(InputError) as exc:
        network({"from": ["a"], "to": ["b"], "capacity": [2], "lower": [3]})
    assert pointers(exc) == ["/arcs/lower/0"]
    with pytest.raises(InputError) as exc:
        network({"from": ["a"], "to": ["b"], "lower": [1]}, allow_lower=False)
    assert pointers(exc) == ["/arcs/lower/0"]


def test_number_column_reports_at_most_twenty_errors():
    with pytest.raises(InputError) as exc:
        number_column(["x"] * 100, lambda i: f"/c/{i}")
    assert len(exc.value.errors) == 20 and exc.value.errors[3].pointer == "/c/3"


def test_nodes_in_three_shapes():
    assert read_nodes(["a", "b"]).ids.values == ["a", "b"]
    objs = read_nodes([{"id": "a", "supply": 3}, {"id": "b"}], extra_fields=("supply",))
    assert objs.ids.values == ["a", "b"] and objs.fields["supply"].values == [3, 0]
    cols = read_nodes({"id": ["a", "b"], "supply": [1, -1]}, extra_fields=("supply",))
    assert cols.fields["supply"].where(1) == "/nodes/supply/1"
    with pytest.raises(InputError):
        read_nodes([{"id": "a", "weight": 1}])
    with pytest.raises(InputError):
        read_nodes({"id": ["a"], "supply": [1, 2]}, extra_fields=("supply",))


def test_empty_network_is_valid_shape():
    net = network({"from": [], "to": []}, nodes=["s", "t"])
    assert net.num_arcs == 0 and net.nodes.ids == ["s", "t"]


def test_idcolumn_where_is_used_for_declared_nodes():
    col = IdColumn(["a", 3], lambda i: f"/nodes/{i}")
    with pytest.raises(InputError) as exc:
        build_network(read_arcs({"from": ["a"], "to": ["b"]}), col)
    assert pointers(exc) == ["/nodes/1"]


def test_a_kinds_further_fields_reach_it_as_decoded_with_their_pointers():
    from service.model.arccolumns import ARC_FIELDS

    fields = ARC_FIELDS + ("transit",)
    objects = read_arcs([{"from": 1, "to": 2, "transit": 3, "capacity": [1, None]}], fields=fields,
                        as_decoded=("capacity",))
    columns = read_arcs({"from": [1], "to": [2], "transit": [3], "capacity": [[1, None]]}, fields=fields,
                        as_decoded=("capacity",))
    for arcs, at in ((objects, "/arcs/0/transit"), (columns, "/arcs/transit/0")):
        assert arcs.column("transit").values == [3] and arcs.column("transit").where(0) == at
        # The per-period list is the kind's to read: not typed as one number per arc.
        assert "capacity" not in arcs.numbers and arcs.column("capacity").values == [[1, None]]
    assert read_arcs([{"from": 1, "to": 2, "capacity": 4}]).column("capacity").values.values.tolist() == [4]
    with pytest.raises(InputError) as exc:  # a kind that did not ask for it
        read_arcs([{"from": 1, "to": 2, "transit": 3}])
    assert pointers(exc) == ["/arcs/0/transit"]
